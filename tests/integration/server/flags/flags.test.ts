// The flag lifecycle driven by assessments, against the real PostgreSQL schema: open, refresh, wake a
// snooze "until the next result", supersede, stopped orders, closures by a person, concurrent writers.
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { supersedeFlagsOfStoppedOrders } from '../../../../src/lib/server/flags';
import { stopBoss } from '../../../../src/lib/server/queue';
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
let meropenem: AgentRow;

/** A meropenem order started `startH` hours ago with CrCl 121 mL/min at the start, then `crclNow`. */
async function arcPatient(crclNow: number, resultAgeH = 2, startH = 48) {
	const patient = await makePatient();
	const order = await makeOrder(patient, meropenem, { doseMg: 1000, intervalH: 8 }, ago(startH));
	// the order was last changed when it started (closures by a person are compared with this)
	await getDb().execute(sql`update orders set updated_at = ${ago(startH).toISOString()}::timestamptz where id = ${order.id}::uuid`);
	const results: Results = {
		creatinine: [
			{ at: ago(startH + 2), mgDl: scrFor(121.5) },
			{ at: ago(resultAgeH), mgDl: scrFor(crclNow) }
		],
		albumin: [{ at: ago(startH + 2), gL: 40 }]
	};
	return { patient, order, results };
}

beforeAll(async () => {
	meropenem = await ensureAgent('Meropenem');
});

afterAll(async () => {
	await stopBoss();
});

describe('opening flags', () => {
	it('seeds the default rule set on first use and opens a flag traceable to the rule version and the assessment', async () => {
		const before = Array.from((await getDb().execute(sql`select count(*)::int as n from rule_versions`)) as Iterable<{ n: number }>);
		expect(before[0].n).toBe(0);
		const { patient, order, results } = await arcPatient(140);
		const stored = await storeAssessment(order, patient, results, ago(1));
		await evaluate([stored]);

		const versions = Array.from(
			(await getDb().execute(sql`select id, version, status from rule_versions`)) as Iterable<{ id: string; version: number; status: string }>
		);
		expect(versions).toHaveLength(1);
		expect(versions[0]).toMatchObject({ version: 1, status: 'active' });
		const audits = Array.from(
			(await getDb().execute(sql`select action, actor_id from audit_log where action = 'rules.default_seeded'`)) as Iterable<Record<string, unknown>>
		);
		expect(audits).toEqual([{ action: 'rules.default_seeded', actor_id: null }]);

		const flags = await openFlags(order.id);
		expect(flags.map((f) => f.rule_key)).toEqual(['possible-arc']);
		const flag = flags[0];
		expect(flag).toMatchObject({
			state: 'new',
			severity: 'moderate',
			rule_version_id: versions[0].id,
			assessment_id: stored.assessmentId,
			outcome: null,
			version: 1
		});
		expect((flag.facts as { crclMlMin: number }).crclMlMin).toBeCloseTo(140, 6);
		expect(flag.finding).toMatch(/^Possible augmented renal clearance: CrCl 140\s?mL\/min \(threshold 130\s?mL\/min\)/u);
		expect(flag.suggested_action).toContain('measured urinary creatinine clearance');
		// moderate: 50 + change + age, never reaching high's 100
		expect(flag.priority as number).toBeGreaterThanOrEqual(50);
		expect(flag.priority as number).toBeLessThan(100);

		const events = await eventsOf(flag.id as string);
		expect(events).toEqual([
			{
				kind: 'opened',
				actor_id: null,
				from_state: null,
				to_state: 'new',
				data: expect.objectContaining({ ruleVersionId: versions[0].id, assessmentId: stored.assessmentId, severity: 'moderate' })
			}
		]);
	});

	it('opens nothing on an unremarkable order', async () => {
		const { patient, order, results } = await arcPatient(110);
		await evaluate([await storeAssessment(order, patient, results, ago(1))]);
		expect(await allFlags(order.id)).toEqual([]);
	});
});

describe('refresh and supersession', () => {
	it('refreshes the open flag while the rule holds and supersedes it when it no longer does', async () => {
		const { patient, order, results } = await arcPatient(140, 6);
		await evaluate([await storeAssessment(order, patient, results, ago(5))]);
		const [opened] = await openFlags(order.id);

		results.creatinine.push({ at: ago(3), mgDl: scrFor(150) });
		const second = await storeAssessment(order, patient, results, ago(2.5));
		await evaluate([second]);
		const [refreshed] = await openFlags(order.id);
		expect(refreshed.id).toBe(opened.id);
		expect(refreshed).toMatchObject({ assessment_id: second.assessmentId, state: 'new', version: 2 });
		expect((refreshed.facts as { crclMlMin: number }).crclMlMin).toBeCloseTo(150, 6);
		expect(refreshed.finding).toMatch(/CrCl 150\s?mL\/min/u);

		results.creatinine.push({ at: ago(1.5), mgDl: scrFor(112) });
		const third = await storeAssessment(order, patient, results, ago(1));
		await evaluate([third]);
		expect(await openFlags(order.id)).toEqual([]);
		const [closed] = await allFlags(order.id);
		expect(closed).toMatchObject({ id: opened.id, state: 'closed', outcome: 'superseded' });
		expect(closed.closed_at).not.toBeNull();
		const events = await eventsOf(opened.id as string);
		expect(events.map((e) => e.kind)).toEqual(['opened', 'refreshed', 'finding_resolved', 'closed']);
		expect(events[2]).toMatchObject({
			actor_id: null,
			data: expect.objectContaining({ ruleKey: 'possible-arc', reason: 'condition no longer holds', assessmentId: third.assessmentId })
		});
		expect(events[3]).toMatchObject({
			actor_id: null,
			from_state: 'new',
			to_state: 'closed',
			data: expect.objectContaining({ outcome: 'superseded', reason: 'every finding resolved', assessmentId: third.assessmentId })
		});
		// the finding itself records the assessment that resolved it
		const [finding] = await findingsOf(opened.id as string);
		expect(finding).toMatchObject({ rule_key: 'possible-arc', resolved_assessment_id: third.assessmentId, resolved_reason: 'condition no longer holds' });
		expect(finding.resolved_at).not.toBeNull();
	});

	it('leaves an open flag alone when the rule cannot be decided, and does not let an older assessment close it', async () => {
		const { patient, order, results } = await arcPatient(140, 100, 120);
		const older = await storeAssessment(order, patient, results, ago(99));
		const newer = await storeAssessment(order, patient, results, ago(98));
		await evaluate([newer]);
		const [flag] = await openFlags(order.id);
		// an older assessment evaluated afterwards (a replay racing the feed) decides nothing
		await evaluate([{ ...older, assessment: { ...older.assessment, renal: { ...older.assessment.renal, crclMlMin: 100 } } }]);
		expect((await openFlags(order.id))[0]).toMatchObject({ id: flag.id, assessment_id: newer.assessmentId, state: 'new' });

		// 98 h later the creatinine is stale: no CrCl, so possible-arc is undecidable and its finding stays
		// as it was, while the missing creatinine joins the same flag as a second finding
		const stale = await storeAssessment(order, patient, results, ago(1));
		expect(stale.assessment.renal.crclMlMin).toBeNull();
		await evaluate([stale]);
		const flags = await openFlags(order.id);
		expect(flags).toHaveLength(1);
		expect(flags[0]).toMatchObject({ id: flag.id, assessment_id: stale.assessmentId });
		const findings = await findingsOf(flag.id as string);
		expect(findings.map((f) => [f.rule_key, f.resolved_at])).toEqual([
			['creatinine-missing', null],
			['possible-arc', null]
		]);
		expect(findings[1]).toMatchObject({ assessment_id: newer.assessmentId, raised_assessment_id: newer.assessmentId });
		expect(findings[0]).toMatchObject({ raised_assessment_id: stale.assessmentId });
		expect((await eventsOf(flag.id as string)).map((e) => e.kind)).toEqual(['opened', 'finding_joined', 'refreshed']);
	});

	it('supersedes every open flag of a stopped order', async () => {
		const { patient, order, results } = await arcPatient(140);
		await evaluate([await storeAssessment(order, patient, results, ago(1.5))]);
		expect(await openFlags(order.id)).toHaveLength(1);
		await evaluate([await storeAssessment(order, patient, results, ago(1), 'stopped')]);
		expect(await openFlags(order.id)).toEqual([]);
		const [flag] = await allFlags(order.id);
		expect((await eventsOf(flag.id as string)).at(-1)?.data).toMatchObject({ outcome: 'superseded', reason: 'order stopped' });

		// a stopped order the feed did not re-assess: swept by supersedeFlagsOfStoppedOrders
		const other = await arcPatient(140);
		await evaluate([await storeAssessment(other.order, other.patient, other.results, ago(1))]);
		await getDb().execute(sql`update orders set status = 'stopped', stopped_at = now() where id = ${other.order.id}::uuid`);
		expect(await getDb().transaction((tx) => supersedeFlagsOfStoppedOrders(tx, [other.order.id]))).toBe(1);
		expect(await openFlags(other.order.id)).toEqual([]);
	});
});

describe('snoozed "until the next result"', () => {
	it('stays snoozed when re-evaluated on the same results and wakes to its prior state on a newer one', async () => {
		const pharmacist = await makeUser('pharmacist');
		const { patient, order, results } = await arcPatient(140, 3);
		await evaluate([await storeAssessment(order, patient, results, ago(2.5))]);
		const [flag] = await openFlags(order.id);
		// what a pharmacist's snooze writes (claimed, in review, then snoozed until the next result)
		await getDb().execute(
			sql`update flags set state = 'snoozed', assigned_to = ${pharmacist.actorId}::uuid, snooze_until_next_result = true, version = version + 1 where id = ${flag.id as string}::uuid`
		);
		await getDb().execute(
			sql`insert into flag_events (flag_id, actor_id, kind, from_state, to_state, data, at) values (${flag.id as string}::uuid, ${pharmacist.actorId}::uuid, 'snoozed', 'in_review', 'snoozed', '{"untilNextResult": true}'::jsonb, ${ago(2).toISOString()}::timestamptz)`
		);

		await evaluate([await storeAssessment(order, patient, results, ago(1.5))]);
		expect((await openFlags(order.id))[0]).toMatchObject({ state: 'snoozed', snooze_until_next_result: true });

		results.creatinine.push({ at: ago(1), mgDl: scrFor(145) });
		await evaluate([await storeAssessment(order, patient, results, ago(0.5))]);
		expect((await openFlags(order.id))[0]).toMatchObject({ id: flag.id, state: 'in_review', snooze_until_next_result: false, assigned_to: pharmacist.actorId });
		const events = await eventsOf(flag.id as string);
		expect(events.slice(-2)).toEqual([
			expect.objectContaining({ kind: 'refreshed', actor_id: null }),
			expect.objectContaining({ kind: 'woke', actor_id: null, from_state: 'snoozed', to_state: 'in_review' })
		]);
	});
});

describe('closed by a person', () => {
	it('does not open the same finding again on the same results, but does after a newer result', async () => {
		const { patient, order, results } = await arcPatient(140, 3);
		await evaluate([await storeAssessment(order, patient, results, ago(2.5))]);
		const [flag] = await openFlags(order.id);
		await getDb().execute(
			sql`update flags set state = 'closed', outcome = 'no_action', closed_at = ${ago(2).toISOString()}::timestamptz where id = ${flag.id as string}::uuid`
		);

		await evaluate([await storeAssessment(order, patient, results, ago(1.5))]);
		expect(await openFlags(order.id)).toEqual([]);

		results.creatinine.push({ at: ago(1), mgDl: scrFor(138) });
		await evaluate([await storeAssessment(order, patient, results, ago(0.5))]);
		const reopened = await openFlags(order.id);
		expect(reopened.map((f) => f.rule_key)).toEqual(['possible-arc']);
		expect(reopened[0].id).not.toBe(flag.id);
	});
});

describe('concurrent evaluation', () => {
	it('never leaves two open flags for one order and rule', async () => {
		const { patient, order, results } = await arcPatient(140, 3);
		const a = await storeAssessment(order, patient, results, ago(2));
		const b = await storeAssessment(order, patient, results, ago(2));
		await Promise.all([evaluate([a]), evaluate([b]), evaluate([a, b])]);
		const flags = await allFlags(order.id);
		expect(flags).toHaveLength(1);
		expect(flags[0].state).toBe('new');
		expect((await eventsOf(flags[0].id as string)).filter((e) => e.kind === 'opened')).toHaveLength(1);
	});
});

describe('refreshes racing a pharmacist', () => {
	it("never overwrites a pharmacist's change and never loses a refresh", async () => {
		const pharmacist = await makeUser('pharmacist');
		const { patient, order, results } = await arcPatient(140, 30);
		await evaluate([await storeAssessment(order, patient, results, ago(29))]);
		const [flag] = await openFlags(order.id);
		const id = flag.id as string;
		// a pharmacist claiming and releasing the flag 20 times, each a versioned change of its own
		const pharmacistChanges = (async () => {
			for (let i = 0; i < 20; i++) {
				await getDb().transaction(async (tx) => {
					const [row] = Array.from(
						(await tx.execute(sql`select version, assigned_to from flags where id = ${id}::uuid for update`)) as Iterable<{
							version: number;
							assigned_to: string | null;
						}>
					);
					await tx.execute(
						sql`update flags set assigned_to = ${row.assigned_to ? null : pharmacist.actorId}::uuid, version = version + 1 where id = ${id}::uuid`
					);
				});
			}
		})();
		// meanwhile new results keep arriving: each a newer assessment that refreshes the flag
		const refreshes = (async () => {
			let last = '';
			for (let i = 0; i < 10; i++) {
				results.creatinine.push({ at: ago(28 - i), mgDl: scrFor(141 + i) });
				const stored = await storeAssessment(order, patient, results, ago(27.5 - i));
				await evaluate([stored]);
				last = stored.assessmentId;
			}
			return last;
		})();
		const [, lastAssessment] = await Promise.all([pharmacistChanges, refreshes]);
		const [after] = await openFlags(order.id);
		// 20 claims/releases end released; every refresh landed on the newest assessment
		expect(after).toMatchObject({ id, assigned_to: null, assessment_id: lastAssessment, state: 'new' });
		expect((after.facts as { crclMlMin: number }).crclMlMin).toBeCloseTo(150, 6);
		const refreshedEvents = (await eventsOf(id)).filter((e) => e.kind === 'refreshed').length;
		// version = 1 (opened) + 20 pharmacist changes + one per refresh event
		expect(after.version).toBe(1 + 20 + refreshedEvents);
		expect(refreshedEvents).toBe(10);
	});
});
