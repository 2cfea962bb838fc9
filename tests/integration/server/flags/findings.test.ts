// One open flag per order holding its findings, against the real schema: several rules on one order
// make one flag; a new finding joins it (raising its priority, waking a snooze, telling its holder);
// a finding that stops holding resolves inside it; two workers racing on one order make one flag.
// Thresholds are the default rule set's (src/lib/rules/default-rules.ts, each with its source there).
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { listBoard } from '../../../../src/lib/server/flags';
import { stopBoss } from '../../../../src/lib/server/queue';
import { getActiveRuleSet } from '../../../../src/lib/server/rules';
import { boardQuerySchema } from '../../../../src/lib/validation/flags';
import {
	allFlags,
	ensureAgent,
	evaluate,
	eventsOf,
	findingsOf,
	HOUR_MS,
	makeOrder,
	makePatient,
	makeUser,
	openFlags,
	scrFor,
	storeAssessment,
	type AgentRow,
	type Results
} from '../rules/fixture';

const now = new Date();
const ago = (h: number) => new Date(now.getTime() - h * HOUR_MS);
const openKeys = async (flagId: string) => (await findingsOf(flagId)).filter((f) => f.resolved_at === null).map((f) => f.rule_key);
let meropenem: AgentRow;

/** Meropenem 1 g q8h started 48 h ago, CrCl `before` mL/min at the start; `after` measured 2 h ago. */
async function meropenemOrder(before: number, after: number) {
	const patient = await makePatient();
	const order = await makeOrder(patient, meropenem, { doseMg: 1000, intervalH: 8 }, ago(48));
	await getDb().execute(sql`update orders set updated_at = ${ago(48).toISOString()}::timestamptz where id = ${order.id}::uuid`);
	const results: Results = {
		creatinine: [
			{ at: ago(50), mgDl: scrFor(before) },
			{ at: ago(2), mgDl: scrFor(after) }
		],
		albumin: [{ at: ago(50), gL: 40 }]
	};
	return { patient, order, results };
}

beforeAll(async () => {
	meropenem = await ensureAgent('Meropenem');
	await getActiveRuleSet();
});

afterAll(async () => {
	await stopBoss();
});

describe('several rules on one order', () => {
	it('make one flag whose headline is the worst finding, and the board shows it once with markers for the others', async () => {
		// CrCl 100 → 40 mL/min in two days on meropenem 1 g q8h: the dose is above the renal band (high),
		// KDIGO AKI (high; creatinine ×2.5 within 48 h), expected half-life prolonged and creatinine
		// unstable (moderate)
		const { patient, order, results } = await meropenemOrder(100, 40);
		const stored = await storeAssessment(order, patient, results, ago(1));
		await evaluate([stored]);
		const flags = await openFlags(order.id);
		expect(flags).toHaveLength(1);
		const flag = flags[0];
		expect(await openKeys(flag.id as string)).toEqual(['aki', 'creatinine-unstable', 'dose-above-band', 'half-life-prolonged']);
		expect(flag.severity).toBe('high');
		expect(['aki', 'dose-above-band']).toContain(flag.rule_key);
		const findings = await findingsOf(flag.id as string);
		expect(Math.max(...findings.map((f) => f.priority as number))).toBe(flag.priority);
		for (const f of findings) expect(f).toMatchObject({ raised_assessment_id: stored.assessmentId, assessment_id: stored.assessmentId, resolved_at: null });
		const [opened] = await eventsOf(flag.id as string);
		expect(opened).toMatchObject({ kind: 'opened', data: expect.objectContaining({ findings: expect.arrayContaining(['aki', 'dose-above-band']) }) });

		const pharmacist = await makeUser('pharmacist');
		const page = await listBoard(boardQuerySchema.parse({ q: await patientMrn(patient.id) }), pharmacist.actorId);
		expect(page.rows).toHaveLength(1);
		const row = page.rows[0];
		expect(row.findings).toHaveLength(4);
		expect(row.findings[0].severity).toBe('high');
		expect(row.findings.map((f) => f.severity)).toEqual(['high', 'high', 'moderate', 'moderate']);
		// rule titles, not keys
		const titles = new Map((await getActiveRuleSet()).rules.map((r) => [r.key, r.title]));
		for (const f of row.findings) expect(f.ruleTitle).toBe(titles.get(f.ruleKey));
		expect(row.ruleTitle).toBe(titles.get(row.ruleKey));
		// a rule or severity filter matches the flag when any of its findings does
		for (const filter of [{ rule: 'half-life-prolonged' }, { rule: 'aki' }, { severity: 'moderate' }]) {
			const filtered = await listBoard(boardQuerySchema.parse({ ...filter, q: await patientMrn(patient.id) }), pharmacist.actorId);
			expect(
				filtered.rows.map((r) => r.id),
				JSON.stringify(filter)
			).toEqual([flag.id]);
		}
		expect((await listBoard(boardQuerySchema.parse({ rule: 'possible-arc', q: await patientMrn(patient.id) }), pharmacist.actorId)).rows).toEqual([]);
	});

	it('closes the flag and resolves every finding when the order stops', async () => {
		const { patient, order, results } = await meropenemOrder(100, 40);
		await evaluate([await storeAssessment(order, patient, results, ago(1.5))]);
		const [flag] = await openFlags(order.id);
		const stopped = await storeAssessment(order, patient, results, ago(1), 'stopped');
		await evaluate([stopped]);
		expect(await openFlags(order.id)).toEqual([]);
		const findings = await findingsOf(flag.id as string);
		expect(findings).toHaveLength(4);
		for (const f of findings) expect(f).toMatchObject({ resolved_reason: 'order stopped', resolved_assessment_id: stopped.assessmentId });
		expect((await eventsOf(flag.id as string)).at(-1)).toMatchObject({
			kind: 'closed',
			to_state: 'closed',
			data: expect.objectContaining({ outcome: 'superseded', reason: 'order stopped' })
		});
	});
});

describe('a new finding on an order with an open flag', () => {
	it('joins it, raises its priority with a mark and a notice to its holder, and the finding that stopped holding resolves inside it', async () => {
		// CrCl 140 at the start and now: possible augmented renal clearance (moderate) ...
		const { patient, order, results } = await meropenemOrder(140, 140);
		await evaluate([await storeAssessment(order, patient, results, ago(1.5))]);
		const [flag] = await openFlags(order.id);
		expect(await openKeys(flag.id as string)).toEqual(['possible-arc']);
		expect(flag.severity).toBe('moderate');
		const pharmacist = await makeUser('pharmacist');
		await getDb().execute(
			sql`update flags set state = 'in_review', assigned_to = ${pharmacist.actorId}::uuid, version = version + 1 where id = ${flag.id as string}::uuid`
		);

		// ... then CrCl 60: AKI (high), half-life prolonged and creatinine unstable join; ARC no longer holds
		results.creatinine.push({ at: ago(1), mgDl: scrFor(60) });
		const later = await storeAssessment(order, patient, results, ago(0.5));
		await evaluate([later]);
		const flags = await allFlags(order.id);
		expect(flags).toHaveLength(1);
		const after = flags[0];
		expect(after).toMatchObject({ id: flag.id, state: 'in_review', severity: 'high', assessment_id: later.assessmentId, assigned_to: pharmacist.actorId });
		expect(after.priority as number).toBeGreaterThanOrEqual(100);
		expect(after.escalated_at).not.toBeNull();
		expect(await openKeys(flag.id as string)).toEqual(['aki', 'creatinine-unstable', 'half-life-prolonged']);
		const arc = (await findingsOf(flag.id as string)).find((f) => f.rule_key === 'possible-arc')!;
		expect(arc).toMatchObject({ resolved_assessment_id: later.assessmentId, resolved_reason: 'condition no longer holds' });
		const events = await eventsOf(flag.id as string);
		const joined = events.filter((e) => e.kind === 'finding_joined');
		expect(joined.map((e) => (e.data as { ruleKey: string }).ruleKey).sort()).toEqual(['aki', 'creatinine-unstable', 'half-life-prolonged']);
		expect(joined.find((e) => (e.data as { ruleKey: string }).ruleKey === 'aki')!.data).toMatchObject({ raisedSeverity: true, severity: 'high' });
		expect(events.filter((e) => e.kind === 'finding_resolved').map((e) => (e.data as { ruleKey: string }).ruleKey)).toEqual(['possible-arc']);
		const notices = Array.from(
			(await getDb().execute(sql`select text, link from notifications where user_id = ${pharmacist.actorId}::uuid`)) as Iterable<{ text: string; link: string }>
		);
		expect(notices).toHaveLength(1);
		expect(notices[0]).toMatchObject({ link: `/flags/${flag.id}` });
		expect(notices[0].text).toMatch(/high-severity finding joined/);
	});

	it('wakes a flag snoozed until a time when a more severe finding joins', async () => {
		const { patient, order, results } = await meropenemOrder(140, 140);
		await evaluate([await storeAssessment(order, patient, results, ago(1.5))]);
		const [flag] = await openFlags(order.id);
		await getDb().execute(
			sql`update flags set state = 'snoozed', snoozed_until = ${new Date(now.getTime() + 24 * HOUR_MS).toISOString()}::timestamptz, version = version + 1 where id = ${flag.id as string}::uuid`
		);
		await getDb().execute(
			sql`insert into flag_events (flag_id, kind, from_state, to_state, data, at) values (${flag.id as string}::uuid, 'snoozed', 'new', 'snoozed', '{}'::jsonb, ${ago(1.2).toISOString()}::timestamptz)`
		);
		// a new result that keeps the same finding does not wake a time snooze
		results.creatinine.push({ at: ago(1.1), mgDl: scrFor(145) });
		await evaluate([await storeAssessment(order, patient, results, ago(1))]);
		expect((await openFlags(order.id))[0]).toMatchObject({ state: 'snoozed' });
		// a high-severity finding joining does
		results.creatinine.push({ at: ago(0.6), mgDl: scrFor(60) });
		await evaluate([await storeAssessment(order, patient, results, ago(0.5))]);
		expect((await openFlags(order.id))[0]).toMatchObject({ id: flag.id, state: 'new', severity: 'high' });
		expect((await eventsOf(flag.id as string)).at(-1)).toMatchObject({
			kind: 'woke',
			from_state: 'snoozed',
			to_state: 'new',
			data: expect.objectContaining({ reason: 'a more severe finding joined' })
		});
	});
});

describe('two workers on one order', () => {
	it('make one flag: the unique index holds and the loser joins its findings to the winner', async () => {
		for (let round = 0; round < 5; round++) {
			const { patient, order, results } = await meropenemOrder(100, 40);
			const a = await storeAssessment(order, patient, results, ago(1));
			const b = await storeAssessment(order, patient, results, ago(1));
			await Promise.all([evaluate([a]), evaluate([b])]);
			const flags = await allFlags(order.id);
			expect(flags).toHaveLength(1);
			expect(await openKeys(flags[0].id as string)).toEqual(['aki', 'creatinine-unstable', 'dose-above-band', 'half-life-prolonged']);
			expect((await eventsOf(flags[0].id as string)).filter((e) => e.kind === 'opened')).toHaveLength(1);
		}
	});

	it('cannot store a second open flag for an order, whoever writes it', async () => {
		const { patient, order, results } = await meropenemOrder(100, 40);
		await evaluate([await storeAssessment(order, patient, results, ago(1))]);
		await expect(
			getDb().execute(sql`insert into flags (order_id, patient_id, rule_key, rule_version_id, assessment_id, severity, priority, finding, facts)
				select order_id, patient_id, 'another', rule_version_id, assessment_id, severity, priority, 'a second flag', '{}'::jsonb from flags where order_id = ${order.id}::uuid`)
		).rejects.toMatchObject({ cause: expect.objectContaining({ code: '23505', constraint_name: 'flags_one_open_per_order' }) });
	});
});

async function patientMrn(patientId: string): Promise<string> {
	const [row] = Array.from((await getDb().execute(sql`select mrn from patients where id = ${patientId}::uuid`)) as Iterable<{ mrn: string }>);
	return row.mrn;
}
