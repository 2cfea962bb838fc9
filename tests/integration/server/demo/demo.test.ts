// The Larkspur Bay demo: the agent library and the hospital seeded through the feed, assessed at
// once, and played forward by the simulator through the same feed.
import { count, eq, isNull, sql } from 'drizzle-orm';
import { afterAll, describe, expect, it } from 'vitest';
import { planFor, simulateTick, seedAgents, seedHospital, seedUsers } from '../../../../src/lib/server/demo';
import { givenDoses, type GivenDose } from '../../../../src/lib/server/demo/dosing';
import { getDb } from '../../../../src/lib/server/db';
import {
	agents,
	assessments,
	encounters,
	feedMessages,
	labResults,
	medicationAdministrations,
	orders,
	patients,
	quarantine
} from '../../../../src/lib/server/db/schema';
import { stopBoss } from '../../../../src/lib/server/queue';
import { drainReassess, queuedOrderIds } from '../feed/helpers';

const db = () => getDb();
const n = async (q: Promise<{ n: number }[]>) => (await q)[0].n;
const seededAt = new Date(Date.now() - 60_000);

afterAll(stopBoss);

describe("demo seed: today's hospital only (days: 0)", () => {
	it('seeds the agent library from fixtures/agents.json, idempotently, keeping an administrator’s edits', async () => {
		expect(await seedAgents()).toBe(20);
		expect(await seedAgents()).toBe(0);
		const [vanco] = await db().select().from(agents).where(eq(agents.code, 'J01XA01'));
		expect(vanco).toMatchObject({ name: 'Vancomycin', rxnormCode: '11124', agentClass: 'glycopeptide' });
		expect(vanco.params).toMatchObject({ code: 'J01XA01', fe: 0.85, model: 'vancomycin' });
		expect(vanco.params).not.toHaveProperty('provenance');
		expect(vanco.provenance.fe).toBe('M');
		// an edited agent keeps its edit
		await seedUsers();
		const [admin] = Array.from((await db().execute(sql`select id from users where role = 'admin' limit 1`)) as unknown as { id: string }[]);
		await db()
			.update(agents)
			.set({ synonyms: ['vanc', 'vanco', 'vancocin-local'], updatedBy: admin.id })
			.where(eq(agents.id, vanco.id));
		await seedAgents();
		const [after] = await db().select().from(agents).where(eq(agents.id, vanco.id));
		expect(after.synonyms).toContain('vancocin-local');
	});

	it('creates about 120 inpatients and 150 active orders through the feed, every order assessed', async () => {
		const started = performance.now();
		const result = await seedHospital({ now: seededAt, days: 0 });
		const ms = performance.now() - started;
		expect(result.skipped).toBe(false);
		expect(await n(db().select({ n: count() }).from(patients))).toBe(120);
		const active = await n(db().select({ n: count() }).from(orders).where(eq(orders.status, 'active')));
		expect(active).toBeGreaterThanOrEqual(140);
		expect(active).toBeLessThanOrEqual(160);
		expect(await n(db().select({ n: count() }).from(encounters).where(isNull(encounters.dischargedAt)))).toBe(120);
		expect(await n(db().select({ n: count() }).from(quarantine))).toBe(0);
		const sources = await db().selectDistinct({ source: feedMessages.source }).from(feedMessages);
		expect(sources.map((s) => s.source)).toEqual(['seed']);
		// every active order has its assessment already, and nothing waits in the queue
		const assessed = Array.from(
			(await db().execute(
				sql`select count(distinct a.order_id)::int as n from assessments a join orders o on o.id = a.order_id where o.status = 'active'`
			)) as unknown as { n: number }[]
		)[0].n;
		expect(assessed).toBe(active);
		expect(await queuedOrderIds()).toEqual([]);
		// most assessments are complete: the generator gives every patient height, weight, creatinine and albumin
		const complete = await n(db().select({ n: count() }).from(assessments).where(eq(assessments.complete, true)));
		expect(complete / active).toBeGreaterThan(0.8);
		// a few Renal Unit patients are on thrice-weekly haemodialysis: their orders are assessed on it
		const onDialysis = Array.from(
			(await db().execute(sql`select count(*)::int as n from assessments where result->'renal'->>'renalReplacement' = 'ihd'`)) as unknown as { n: number }[]
		)[0].n;
		expect(onDialysis).toBeGreaterThan(0);
		console.log(
			`demo seed: ${result.patients} patients, ${result.orders} orders, ${result.results} results, ${result.assessed} assessments in ${Math.round(ms)} ms`
		);
	});

	it('gives every demo order a prescriber in the directory: a few with a demo sign-in, most reached by e-mail alone', async () => {
		const [row] = Array.from(
			(await db().execute(sql`
				select count(*)::int as prescribers,
					count(*) filter (where user_id is not null)::int as with_account,
					count(*) filter (where user_id is null and email like '%.test')::int as email_only,
					count(*) filter (where email is null and email_problem = 'no e-mail in telecom')::int as no_email,
					(select count(*)::int from orders where practitioner_id is null) as orders_without,
					(select count(*)::int from orders o join prescribers p on p.id = o.practitioner_id where p.user_id is null and p.email is not null) as orders_to_email_only,
					(select count(*)::int from prescriber_roles where specialty is not null) as roles
				from prescribers`)) as unknown as Record<string, number>[]
		);
		expect(row).toMatchObject({ prescribers: 16, with_account: 3, email_only: 12, no_email: 1, orders_without: 0, roles: 16 });
		expect(row.orders_to_email_only).toBeGreaterThan(50);
		// the demo physicians' orders carry their account
		const [accounts] = Array.from(
			(await db().execute(sql`select count(*)::int as n from orders o join prescribers p on p.id = o.practitioner_id
				where p.user_id is not null and o.prescriber_id is distinct from p.user_id`)) as unknown as { n: number }[]
		);
		expect(accounts.n).toBe(0);
	});

	it('shows the planned courses: AKI, augmented clearance, low albumin, obesity', async () => {
		const rows = Array.from(
			(await db().execute(sql`
				select a.crcl_ml_min, a.albumin_gl, (a.result->'renal'->>'kdigoStage')::int as stage, (a.result->'renal'->>'arc')::boolean as arc,
					(a.result->'covariates'->>'weightKg')::float8 as weight
				from assessments a`)) as unknown as { crcl_ml_min: number | null; albumin_gl: number | null; stage: number; arc: boolean; weight: number | null }[]
		);
		expect(rows.some((r) => r.stage >= 1)).toBe(true);
		expect(rows.some((r) => r.arc)).toBe(true);
		expect(rows.some((r) => (r.albumin_gl ?? 99) < 25)).toBe(true);
		expect(rows.some((r) => (r.weight ?? 0) > 120)).toBe(true);
		expect(rows.some((r) => (r.crcl_ml_min ?? 999) < 30)).toBe(true);
	});

	it('seeds the hospital only once', async () => {
		const again = await seedHospital();
		expect(again.skipped).toBe(true);
		expect(await n(db().select({ n: count() }).from(patients))).toBe(120);
	});
});

describe('demo simulator', () => {
	it('draws new results through the feed and queues the affected orders', async () => {
		const before = await n(db().select({ n: count() }).from(labResults));
		const tick = await simulateTick({ draws: 8 });
		expect(tick.draws).toBe(8);
		expect(tick.ingest?.counts.quarantined).toBe(0);
		expect(await n(db().select({ n: count() }).from(labResults))).toBeGreaterThanOrEqual(before + 8);
		expect((await queuedOrderIds()).length).toBeGreaterThanOrEqual(8);
		expect(await drainReassess()).toBe(tick.ingest?.ordersQueued);
		const [message] = await db()
			.select()
			.from(feedMessages)
			.where(eq(feedMessages.id, tick.ingest?.messageId as string));
		expect(message.source).toBe('simulator');
	});

	it('records the doses given of vancomycin and aminoglycoside orders, and levels for some of their patients', async () => {
		const doses = Array.from(
			(await db().execute(sql`
				select a.code, count(*)::int as n, bool_and(m.order_id = o.id and m.dose_mg = o.dose_mg and m.end_at > m.start_at) as tied
				from medication_administrations m join orders o on o.id = m.order_id join agents a on a.id = o.agent_id
				group by a.code`)) as unknown as { code: string; n: number; tied: boolean }[]
		);
		expect(doses.map((d) => d.code).every((c) => ['J01XA01', 'J01GB03', 'J01GB01', 'J01GB06'].includes(c))).toBe(true);
		expect(doses.find((d) => d.code === 'J01XA01')?.n).toBeGreaterThan(20);
		expect(doses.every((d) => d.tied)).toBe(true);
		const levels = Array.from(
			(await db().execute(
				sql`select timing, count(*)::int as n, min(value_mg_l) as low, max(value_mg_l) as high from drug_levels group by timing`
			)) as unknown as {
				timing: string;
				n: number;
				low: number;
				high: number;
			}[]
		);
		expect(levels.find((l) => l.timing === 'trough')?.n).toBeGreaterThan(3);
		expect(levels.find((l) => l.timing === 'peak')?.n).toBeGreaterThan(3);
		expect(Math.min(...levels.map((l) => l.low))).toBeGreaterThanOrEqual(0);
	});

	it('the simulator sends each dose of a running vancomycin order when its infusion has ended', async () => {
		// a running vancomycin order of a patient who stays beyond the next dose (a tick also discharges)
		const candidates = await db()
			.select({
				sourceId: orders.sourceId,
				startAt: orders.startAt,
				doseMg: orders.doseMg,
				intervalH: orders.intervalH,
				infusionH: orders.infusionH,
				patient: patients.sourceId,
				admittedAt: encounters.admittedAt
			})
			.from(orders)
			.innerJoin(agents, eq(agents.id, orders.agentId))
			.innerJoin(patients, eq(patients.id, orders.patientId))
			.innerJoin(encounters, eq(encounters.patientId, orders.patientId))
			.where(sql`${agents.code} = 'J01XA01' and ${orders.route} = 'iv' and ${orders.status} = 'active' and ${encounters.dischargedAt} is null`);
		const order = candidates.find((c) => c.admittedAt.getTime() + planFor(c.patient as string).losDays * 86_400_000 > Date.now() + 2 * 86_400_000);
		if (!order) throw new Error('no vancomycin order of a patient staying two more days');
		const dosed = {
			sourceId: order.sourceId as string,
			agentCode: 'J01XA01',
			route: 'iv',
			regimen: { doseMg: order.doseMg, intervalH: order.intervalH, infusionH: order.infusionH },
			startAt: order.startAt,
			stopAt: null
		};
		const far = new Date(Date.now() + 2 * 86_400_000);
		const next = givenDoses(dosed, far).find((d) => d.endAt.getTime() > Date.now()) as GivenDose;
		const id = `${order.sourceId}-ma-${Math.round(next.plannedAt.getTime() / 60_000)}`;
		expect(await n(db().select({ n: count() }).from(medicationAdministrations).where(eq(medicationAdministrations.sourceId, id)))).toBe(0);
		const tick = await simulateTick({ now: new Date(next.endAt.getTime() + 60_000), draws: 0 });
		expect(tick.ingest?.counts.quarantined).toBe(0);
		const [given] = await db().select().from(medicationAdministrations).where(eq(medicationAdministrations.sourceId, id));
		expect(given).toMatchObject({ status: 'completed', doseMg: order.doseMg, startAt: next.startAt, endAt: next.endAt });
		await drainReassess();
	});

	it('discharges patients whose stay is over, stops their orders and admits new patients', async () => {
		const later = new Date(Date.now() + 20 * 86_400_000);
		// a tick three weeks on: every seeded stay has ended (at most 3 discharges a tick)
		const tick = await simulateTick({ now: later, draws: 0 });
		expect(tick.discharges).toBe(3);
		expect(tick.admissions).toBe(2);
		expect(tick.ingest?.counts.quarantined).toBe(0);
		expect(await n(db().select({ n: count() }).from(encounters).where(isNull(encounters.dischargedAt)))).toBe(119);
		const stopped = await n(db().select({ n: count() }).from(orders).where(eq(orders.status, 'stopped')));
		expect(stopped).toBeGreaterThanOrEqual(3);
		expect(await n(db().select({ n: count() }).from(patients))).toBe(122);
	});
});
