// Re-assessment reads the doses given and the levels drawn from the record: a vancomycin order with two
// levels is assessed on the patient's own clearance, keeps the doses and levels with its inputs (so the
// trace re-runs the fit), and its findings reach the board; an order with no level is told a level is due;
// an agent not dosed from levels loads none. Thresholds are the default rule set's.
import { randomUUID } from 'node:crypto';
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { StoredAssessInput } from '../../../../src/lib/clinical';
import { getDb } from '../../../../src/lib/server/db';
import { bodyMeasurements, drugLevels, labResults, medicationAdministrations } from '../../../../src/lib/server/db/schema';
import { listBoard } from '../../../../src/lib/server/flags';
import { stopBoss } from '../../../../src/lib/server/queue';
import { assessmentTrace, reassessOrders } from '../../../../src/lib/server/reassess';
import { boardQuerySchema } from '../../../../src/lib/validation/flags';
import { simulate } from '../../../unit/clinical/levels-helpers';
import { ensureAgent, HOUR_MS, makeOrder, makePatient, makeUser, type AgentRow, type Order, type Patient } from '../rules/fixture';

const now = new Date();
const ago = (h: number) => new Date(now.getTime() - h * HOUR_MS);
let vancomycin: AgentRow;
let meropenem: AgentRow;

beforeAll(async () => {
	vancomycin = await ensureAgent('Vancomycin');
	meropenem = await ensureAgent('Meropenem');
});

afterAll(async () => {
	await stopBoss();
});

/** Height, weight and a stable creatinine of 1.0 mg/dL: the fixture's 40-year-old 70-kg man has CrCl 97 mL/min. */
async function record(patient: Patient) {
	const db = getDb();
	await db.insert(bodyMeasurements).values([
		{ patientId: patient.id, kind: 'height', value: 175, unit: 'cm', valueNormalised: 175, observedAt: ago(200) },
		{ patientId: patient.id, kind: 'weight', value: 70, unit: 'kg', valueNormalised: 70, observedAt: ago(200) }
	]);
	await db.insert(labResults).values(
		[100, 30, 4].map((h) => ({
			patientId: patient.id,
			analyte: 'creatinine' as const,
			loinc: '2160-0',
			value: 1,
			unit: 'mg/dL',
			valueNormalised: 1,
			unitNormalised: 'mg/dL',
			observedAt: ago(h)
		}))
	);
}

/** Vancomycin 1,000 mg q12h over 1.5 h started `startedH` ago, each dose given on time. */
async function vancomycinOrder(startedH: number) {
	const patient = await makePatient();
	await record(patient);
	const order = await makeOrder(patient, vancomycin, { doseMg: 1000, intervalH: 12, infusionH: 1.5 }, ago(startedH));
	const doses = Array.from({ length: Math.floor(startedH / 12) + 1 }, (_, i) => ({ startH: i * 12, durationH: 1.5, doseMg: 1000 }));
	await getDb()
		.insert(medicationAdministrations)
		.values(
			doses.map((d) => ({
				patientId: patient.id,
				orderId: order.id,
				agentId: vancomycin.id,
				startAt: ago(startedH - d.startH),
				endAt: ago(startedH - d.startH - d.durationH),
				doseValue: d.doseMg,
				doseUnit: 'mg',
				doseMg: d.doseMg,
				sourceId: randomUUID()
			}))
		);
	return { patient, order, doses };
}

async function latestAssessment(orderId: string) {
	const [row] = Array.from(
		(await getDb().execute(
			sql`select result, input, trace from assessments where order_id = ${orderId}::uuid order by at desc, created_at desc limit 1`
		)) as Iterable<{ result: Record<string, unknown> & { measured?: Record<string, unknown> }; input: StoredAssessInput; trace: null }>
	);
	return row;
}

async function boardKeys(patient: Patient) {
	const [{ mrn }] = Array.from((await getDb().execute(sql`select mrn from patients where id = ${patient.id}::uuid`)) as Iterable<{ mrn: string }>);
	const pharmacist = await makeUser('pharmacist');
	const page = await listBoard(boardQuerySchema.parse({ q: mrn }), pharmacist.actorId);
	return page.rows.flatMap((r) => r.findings.map((f) => f.ruleKey)).sort();
}

describe('a vancomycin order with two measured levels', () => {
	let patient: Patient;
	let order: Order;
	let trough: number;

	beforeAll(async () => {
		// his own clearance is 2.5 L/h (the population prior for CrCl 97 mL/min says 6.3): 2,000 mg/day gives
		// an AUC24 near 800 mg·h/L; trough before the fifth dose and a level 2 h after its infusion
		({ patient, order } = await vancomycinOrder(54));
		const doses = Array.from({ length: 5 }, (_, i) => ({ startH: i * 12, durationH: 1.5, doseMg: 1000 }));
		const [troughMgL, peakMgL] = simulate(doses, 2.5, 60, [47.75, 51.5]);
		trough = troughMgL;
		await getDb()
			.insert(drugLevels)
			.values(
				[
					{ h: 47.75, mgL: troughMgL, timing: 'trough' as const },
					{ h: 51.5, mgL: peakMgL, timing: 'peak' as const }
				].map((l) => ({
					patientId: patient.id,
					agentId: vancomycin.id,
					loinc: '4092-3',
					timing: l.timing,
					value: l.mgL,
					unit: 'mg/L',
					valueMgL: l.mgL,
					observedAt: ago(54 - l.h),
					sourceId: randomUUID()
				}))
			);
		const result = await reassessOrders([order.id], { now });
		expect(result.assessed).toBe(1);
		// the newest level is the newest result behind the assessment (a snoozed flag wakes on it)
		expect(result.stored[0].lastResultAt).toEqual(ago(54 - 51.5));
	});

	it("stores the patient's own clearance, the AUC24 from the levels and a proposal from them", async () => {
		expect(trough).toBeGreaterThan(20);
		const { result } = await latestAssessment(order.id);
		const measured = result.measured as {
			method: string;
			levelCount: number;
			administrationCount: number;
			individual: { clearanceLPerH: number };
			auc24MgHL: number;
		};
		expect(measured.method).toBe('vancomycin-map');
		expect(measured.levelCount).toBe(2);
		expect(measured.administrationCount).toBe(5);
		expect(measured.individual.clearanceLPerH).toBeLessThan(3.5);
		expect(measured.auc24MgHL).toBeGreaterThan(600);
		expect((result.dosing as { fromLevels?: boolean }).fromLevels).toBe(true);
	});

	it('keeps the doses and levels with its inputs, and the trace re-run shows the fit and agrees with the stored numbers', async () => {
		const row = await latestAssessment(order.id);
		expect(row.input.levels).toHaveLength(2);
		expect(row.input.administrations).toHaveLength(5);
		const trace = assessmentTrace(row as never);
		expect(trace.note).toBeNull();
		const keys = trace.steps.map((s) => s.key);
		for (const k of ['measuredLevels', 'levelPriorClearance', 'levelObjective', 'levelMapClearance', 'levelProposal']) expect(keys).toContain(k);
		expect(keys.filter((k) => k === 'levelResidual')).toHaveLength(2);
	});

	it('puts the measured findings on the board, in place of the population AUC finding', async () => {
		const keys = await boardKeys(patient);
		expect(keys).toContain('vancomycin-measured-auc-outside-window');
		expect(keys).toContain('vancomycin-measured-trough-high');
		expect(keys).not.toContain('vancomycin-auc-outside-target');
		expect(keys).not.toContain('level-due');
	});
});

describe('a vancomycin order running 80 h without a level', () => {
	it('is told a level is due', async () => {
		const { patient, order } = await vancomycinOrder(80);
		await reassessOrders([order.id], { now });
		const { result } = await latestAssessment(order.id);
		expect(result.measured).toMatchObject({ levelCount: 0, administrationCount: 7, reason: 'no level measured' });
		expect(await boardKeys(patient)).toContain('level-due');
	});
});

describe('an agent not dosed from levels', () => {
	it('loads no doses or levels and stores no measured section', async () => {
		const patient = await makePatient();
		await record(patient);
		const order = await makeOrder(patient, meropenem, { doseMg: 1000, intervalH: 8 }, ago(30));
		await reassessOrders([order.id], { now });
		const row = await latestAssessment(order.id);
		expect(row.result.measured).toBeUndefined();
		expect(row.input.levels).toBeUndefined();
		expect(row.input.administrations).toBeUndefined();
	});
});
