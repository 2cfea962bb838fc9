// One band tolerance against the real PostgreSQL: after an administrator publishes a new tolerance, the
// rules (replayed), the patient view's "within / above / below" and the flag's facts say the same. The
// order is invented; meropenem's reduced band (1 g q12h at CrCl 26–50 mL/min) is fixtures/agents.json
// example data, the ±20 % default tolerance common practice.
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { RuleDefinition } from '../../../../src/lib/rules';
import { getDb } from '../../../../src/lib/server/db';
import { evaluateAssessments } from '../../../../src/lib/server/flags';
import { getPatientDetail } from '../../../../src/lib/server/patients';
import { stopBoss } from '../../../../src/lib/server/queue';
import { ruleSets as rules, replayActiveOrders } from '../../../../src/lib/server/rules';
import { ensureAgent, HOUR_MS, makeOrder, makePatient, makeUser, openFlags, scrFor, storeAssessment } from './fixture';

const now = new Date();
const ago = (h: number) => new Date(now.getTime() - h * HOUR_MS);
let admin: Awaited<ReturnType<typeof makeUser>>;

/** The active rule set with the tolerance set, as the rules form requires: the same value in every rule that reads it. */
async function publishTolerance(value: number) {
	const active = await rules.getActiveRuleSet();
	const changed: RuleDefinition[] = structuredClone(active.rules).map((r) =>
		'bandTolerance' in r.params ? { ...r, params: { ...r.params, bandTolerance: value } } : r
	);
	const draft = await rules.saveDraft(changed, { basedOn: active.id }, admin);
	await rules.publish(draft.id, admin, { expectedActiveId: active.id });
	return replayActiveOrders();
}

beforeAll(async () => {
	admin = await makeUser('admin', 'tolerance-lead');
	await rules.seedDefaultVersion();
});

afterAll(async () => {
	await stopBoss();
});

describe('one band tolerance', () => {
	it('after the tolerance changes, the rule, the patient view and the flag agree on above or within', async () => {
		const meropenem = await ensureAgent('Meropenem');
		const patient = await makePatient();
		// 1 g q8h (3 g/day) at CrCl 30 mL/min: 1.5× the band's 2 g/day
		const order = await makeOrder(patient, meropenem, { doseMg: 1000, intervalH: 8 }, ago(48));
		const crcl30 = scrFor(30);
		const stored = await storeAssessment(order, patient, { creatinine: [ago(30), ago(6)].map((at) => ({ at, mgDl: crcl30 })), albumin: [] }, ago(1));
		await evaluateAssessments(getDb(), [stored]);

		const wordOnPatientView = async () => (await getPatientDetail(patient.id))!.orders.find((o) => o.id === order.id)!.latest!.comparedToBand;
		/** the open flag of the order when the dose-above-band rule holds on it (an open finding), else undefined */
		const aboveFlag = async () => {
			const held = Array.from(
				(await getDb().execute(
					sql`select ff.flag_id from flag_findings ff join flags f on f.id = ff.flag_id
						where f.order_id = ${order.id}::uuid and f.state <> 'closed' and ff.resolved_at is null and ff.rule_key = 'dose-above-band'`
				)) as Iterable<{ flag_id: string }>
			);
			return held.length ? (await openFlags(order.id)).find((f) => f.id === held[0].flag_id) : undefined;
		};

		// default ±20 %: above, and the rule holds
		expect(await wordOnPatientView()).toBe('above');
		const flag = await aboveFlag();
		expect(flag).toBeDefined();
		expect((flag!.facts as { doseVsBand: string }).doseVsBand).toBe('above');

		try {
			// ±60 %: 1.5× is within; the replay supersedes the flag and the patient view says within
			await publishTolerance(0.6);
			expect(await aboveFlag()).toBeUndefined();
			expect(await wordOnPatientView()).toBe('within');

			// back to ±20 %: above again on both
			await publishTolerance(0.2);
			expect(await aboveFlag()).toBeDefined();
			expect(await wordOnPatientView()).toBe('above');
		} finally {
			const active = await rules.getActiveRuleSet();
			if (active.rules.some((r) => 'bandTolerance' in r.params && r.params.bandTolerance !== 0.2)) await publishTolerance(0.2);
		}
	});
});
