// Agent library edits against the real PostgreSQL: validated, audited with before and after, tagged as a
// local value, and followed by a rules replay and re-assessment of the agent's active orders.
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { agents as agentService } from '../../../../src/lib/server/agents';
import { getDb } from '../../../../src/lib/server/db';
import { evaluateAssessments } from '../../../../src/lib/server/flags';
import { stopBoss } from '../../../../src/lib/server/queue';
import { ruleSets as rules, replayActiveOrders } from '../../../../src/lib/server/rules';
import { parseAgentForm } from '../../../../src/lib/validation/agents';
import { ensureAgent, HOUR_MS, makeOrder, makePatient, makeUser, openFlags, scrFor, storeAssessment, type AgentRow } from '../rules/fixture';

const now = new Date();
const ago = (h: number) => new Date(now.getTime() - h * HOUR_MS);
const rowsOf = async <T>(query: ReturnType<typeof sql>) => Array.from((await getDb().execute(query)) as Iterable<T>);
let meropenem: AgentRow;
let admin: Awaited<ReturnType<typeof makeUser>>;

/** The editor's form values for an agent as stored (what the page would post unchanged). */
function formValues(agent: AgentRow, active = true): Record<string, string> {
	const p = agent.params;
	const s = (v: number | null | undefined) => (v === null || v === undefined ? '' : String(v));
	const values: Record<string, string> = {
		id: agent.id,
		fe: s(p.fe),
		proteinBinding: s(p.proteinBinding),
		albuminRefGL: s(p.albuminRefGL),
		vdLPerKg: s(p.vdLPerKg),
		vdWeightBasis: p.vdWeightBasis,
		halfLifeNormalH: s(p.halfLifeNormalH),
		model: p.model,
		usualDoseMg: s(p.usualDoseMg),
		usualDoseMgPerKg: s(p.usualDoseMgPerKg),
		usualIntervalH: s(p.usualIntervalH),
		usualInfusionH: s(p.usualInfusionH),
		adjustBy: p.adjustBy,
		troughMaxMgL: s(p.troughMaxMgL),
		aucLowMgHL: s(p.aucTargetMgHL?.[0]),
		aucHighMgHL: s(p.aucTargetMgHL?.[1]),
		loadingTargetMgL: s(p.loadingTargetMgL),
		maxCreatinineAgeH: s(p.maxCreatinineAgeH),
		bioavailability: s(p.bioavailability)
	};
	if (p.nephrotoxic) values.nephrotoxic = 'on';
	if (p.renallyAdjusted) values.renallyAdjusted = 'on';
	if (active) values.active = 'on';
	p.renalBands.forEach((b, i) => {
		for (const k of ['minCrclMlMin', 'maxCrclMlMin', 'doseMg', 'doseMgPerKg', 'intervalH'] as const) values[`bands.${i}.${k}`] = s(b[k]);
		values[`bands.${i}.note`] = b.note ?? '';
		if (b.avoid) values[`bands.${i}.avoid`] = 'on';
		if (b.aucGuided) values[`bands.${i}.aucGuided`] = 'on';
	});
	return values;
}

beforeAll(async () => {
	meropenem = await ensureAgent('Meropenem');
	admin = await makeUser('admin', 'library-lead');
	await rules.seedDefaultVersion();
});

afterAll(async () => {
	await stopBoss();
});

describe('agent form validation', () => {
	it('accepts the stored values unchanged', () => {
		expect(parseAgentForm(formValues(meropenem)).ok).toBe(true);
	});

	it('names the field and the band at fault', () => {
		const values = formValues(meropenem);
		values.fe = '1.4';
		values['bands.1.maxCrclMlMin'] = '20';
		values.usualInfusionH = '10';
		const parsed = parseAgentForm(values);
		expect(parsed.ok).toBe(false);
		if (parsed.ok) return;
		expect(parsed.errors.fe).toBe('Fraction excreted unchanged (fe) must be at most 1.');
		expect(parsed.errors['bands.1.maxCrclMlMin']).toBe('Renal band 2: Upper CrCl must be above the lower CrCl.');
		expect(parsed.errors.usualInfusionH).toBe('The infusion cannot be longer than the interval.');
	});
});

describe('editing an agent', () => {
	it('audits the change, tags edited values as local, and replays and re-assesses the agent’s active orders', async () => {
		// a meropenem order at CrCl 40 mL/min on 1 g q12h: inside the 26–50 band (1 g q12h), no flag
		const patient = await makePatient();
		const order = await makeOrder(patient, meropenem, { doseMg: 1000, intervalH: 12 }, ago(30));
		const stored = await storeAssessment(
			order,
			patient,
			{
				creatinine: [
					{ at: ago(31), mgDl: scrFor(40) },
					{ at: ago(2), mgDl: scrFor(40) }
				],
				albumin: [{ at: ago(31), gL: 40 }]
			},
			ago(1)
		);
		await getDb().transaction((tx) => evaluateAssessments(tx, [stored]));
		expect((await openFlags(order.id)).map((f) => f.rule_key)).not.toContain('dose-above-band');

		// the institution halves the 26–50 mL/min band to 500 mg q12h
		const values = formValues(meropenem);
		const bandIndex = meropenem.params.renalBands.findIndex((b) => b.minCrclMlMin === 26);
		values[`bands.${bandIndex}.doseMg`] = '500';
		const parsed = parseAgentForm(values);
		if (!parsed.ok) throw new Error(JSON.stringify(parsed.errors));
		const jobsBefore = (await rowsOf<{ name: string; n: number }>(sql`select name, count(*)::int as n from pgboss.job group by name`).catch(() => [])) as {
			name: string;
			n: number;
		}[];
		const result = await agentService.update(parsed.data, admin);
		expect(result).toEqual({ changed: ['renalBands'], replayOrders: 1 });

		const [stored2] = await rowsOf<{
			params: { renalBands: { minCrclMlMin: number | null; doseMg: number | null }[] };
			provenance: Record<string, string>;
			updated_by: string;
		}>(sql`select params, provenance, updated_by from agents where id = ${meropenem.id}::uuid`);
		expect(stored2.params.renalBands.find((b) => b.minCrclMlMin === 26)?.doseMg).toBe(500);
		expect(stored2.provenance.renalBands).toBe('local');
		expect(stored2.provenance.fe).toBe('M');
		expect(stored2.updated_by).toBe(admin.actorId);

		const [auditRow] = await rowsOf<{ actor_id: string; before: Record<string, unknown>; after: Record<string, unknown> }>(
			sql`select actor_id, before, after from audit_log where action = 'agent.updated' and object_id = ${meropenem.id}`
		);
		expect(auditRow.actor_id).toBe(admin.actorId);
		expect(Object.keys(auditRow.after).sort()).toEqual(['code', 'renalBands']);

		const jobs = await rowsOf<{ name: string; n: number }>(sql`select name, count(*)::int as n from pgboss.job group by name order by name`);
		const count = (list: { name: string; n: number }[], name: string) => list.find((j) => j.name === name)?.n ?? 0;
		expect(count(jobs, 'rules.replay') - count(jobsBefore, 'rules.replay')).toBe(1);
		expect(count(jobs, 'order.reassess') - count(jobsBefore, 'order.reassess')).toBe(1);
		const [replayJob] = await rowsOf<{ data: { reason: string; agentId: string } }>(
			sql`select data from pgboss.job where name = 'rules.replay' order by created_on desc limit 1`
		);
		expect(replayJob.data).toEqual({ reason: 'agent', agentId: meropenem.id });

		// the replay sees the library as it is now: 1 g q12h is now twice the band's daily dose
		const replay = await replayActiveOrders({ agentId: meropenem.id });
		expect(replay.byRule['dose-above-band']?.opened).toBe(1);
		const [flag] = (await openFlags(order.id)).filter((f) => f.rule_key === 'dose-above-band');
		expect(flag.finding).toMatch(/Daily dose 2000\s?mg\/d is 2× the 1000\s?mg\/d of the library's regimen/u);
	});

	it('keeps what the form does not show: AUC-guided bands, routes, dialysis regimens, loading window (vancomycin)', async () => {
		// an edit of one number must not turn vancomycin's AUC-guided band into a level-guided one, nor drop
		// the oral route's "not absorbed" or the loading cap (Rybak MJ et al., Am J Health-Syst Pharm 2020)
		const vancomycin = await ensureAgent('Vancomycin');
		const values = formValues(vancomycin);
		values.maxCreatinineAgeH = '36';
		const parsed = parseAgentForm(values);
		if (!parsed.ok) throw new Error(JSON.stringify(parsed.errors));
		expect(await agentService.update(parsed.data, admin)).toMatchObject({ changed: ['maxCreatinineAgeH'] });
		const [row] = await rowsOf<{ params: AgentRow['params'] }>(sql`select params from agents where id = ${vancomycin.id}::uuid`);
		expect(row.params.renalBands.some((b) => b.aucGuided === true)).toBe(true);
		expect(row.params.routes.po).toMatchObject({ systemic: false });
		expect(row.params.loadingMaxMg).toBe(3000);
		expect(row.params.renalReplacement.ihd).toBeTruthy();
		expect(row.params.renallyAdjusted).toBe(true);
	});

	it('refuses an AUC-guided band with a fixed dose, naming the band', () => {
		const values = formValues(meropenem);
		values['bands.0.aucGuided'] = 'on';
		const parsed = parseAgentForm(values);
		expect(parsed.ok).toBe(false);
		if (!parsed.ok) expect(parsed.errors['bands.0.aucGuided']).toContain('Renal band 1');
	});

	it('writes nothing when nothing changed', async () => {
		const [current] = await rowsOf<{ params: AgentRow['params'] }>(sql`select params from agents where id = ${meropenem.id}::uuid`);
		const parsed = parseAgentForm(formValues({ ...meropenem, params: current.params }));
		if (!parsed.ok) throw new Error(JSON.stringify(parsed.errors));
		const before = (await rowsOf<{ n: number }>(sql`select count(*)::int as n from audit_log where action = 'agent.updated'`))[0].n;
		expect(await agentService.update(parsed.data, admin)).toEqual({ changed: [], replayOrders: 0 });
		expect((await rowsOf<{ n: number }>(sql`select count(*)::int as n from audit_log where action = 'agent.updated'`))[0].n).toBe(before);
	});
});
