// Valid bundles and CSV files from fixtures/feed round-trip into rows and, through the queue, into
// assessments. Unit conversions are checked against their definitions (sources beside each check).
import { eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { seedUsers } from '../../../../src/lib/server/demo';
import { getDb } from '../../../../src/lib/server/db';
import { agents, assessments, bodyMeasurements, encounters, labResults, orders, patients, users } from '../../../../src/lib/server/db/schema';
import { stopBoss } from '../../../../src/lib/server/queue';
import { reassessOrders, assessmentTrace, TRACE_DIFFERS_NOTE } from '../../../../src/lib/server/reassess';
import { drainReassess, ingestFixtureBundle, ingestFixtureCsv, queuedOrderIds, withAgents } from './helpers';

const db = () => getDb();
const orderBySource = async (sourceId: string) => (await db().select().from(orders).where(eq(orders.sourceId, sourceId)))[0];
const patientBySource = async (sourceId: string) => (await db().select().from(patients).where(eq(patients.sourceId, sourceId)))[0];

beforeAll(async () => {
	await withAgents();
	await seedUsers();
});
afterAll(stopBoss);

describe('FHIR bundles from fixtures/feed', () => {
	it('stores an admission bundle (transaction): patients, encounters, results in stored units, orders', async () => {
		const result = await ingestFixtureBundle('fixtures/feed/admission-bundle.json');
		expect(result.counts).toEqual({ accepted: 15, duplicate: 0, quarantined: 0 });
		expect(result.entries.every((e) => e.outcome === 'accepted' && e.detail === 'created')).toBe(true);

		const p1 = await patientBySource('fx-p-1');
		expect(p1).toMatchObject({ mrn: 'FX0000001', givenName: 'Ottilie', familyName: 'Marwick', sex: 'female', birthDate: '1951-05-14' });
		const p2 = await patientBySource('fx-p-2');
		expect(p2.mrn).toBe('FX0000002');

		const [icu] = await db().select().from(encounters).where(eq(encounters.sourceId, 'fx-e-2'));
		expect(icu).toMatchObject({ ward: 'ICU', bed: 'ICU-04', patientId: p2.id });
		// 02:30 at +01:00 is 01:30 UTC (ISO 8601 offsets)
		expect(icu.admittedAt.toISOString()).toBe('2026-11-26T01:30:00.000Z');

		const labs = await db().select().from(labResults).where(eq(labResults.patientId, p2.id));
		const creatinine = labs.find((l) => l.analyte === 'creatinine');
		// 44 µmol/L ÷ 88.4 = 0.4977 mg/dL (KDIGO 2012: 1 mg/dL = 88.4 µmol/L)
		expect(creatinine).toMatchObject({ loinc: '14682-9', value: 44, unit: 'umol/L', unitNormalised: 'mg/dL' });
		expect(creatinine?.valueNormalised).toBeCloseTo(44 / 88.4, 5);
		const albumin1 = (await db().select().from(labResults).where(eq(labResults.sourceId, 'fx-o-1-alb-1')))[0];
		// 3.1 g/dL = 31 g/L (1 dL = 0.1 L, UCUM)
		expect(albumin1).toMatchObject({ value: 3.1, unit: 'g/dL', valueNormalised: 31, unitNormalised: 'g/L' });

		const body = await db().select().from(bodyMeasurements).where(eq(bodyMeasurements.patientId, p2.id));
		// 1 lb = 0.45359237 kg and 1 in = 2.54 cm exactly (international yard and pound agreement, 1959)
		expect(body.find((b) => b.kind === 'weight')?.valueNormalised).toBeCloseTo(180 * 0.45359237, 5);
		expect(body.find((b) => b.kind === 'height')?.valueNormalised).toBeCloseTo(70 * 2.54, 6);

		const vanco = await orderBySource('fx-rx-1');
		const [vancoAgent] = await db().select().from(agents).where(eq(agents.id, vanco.agentId));
		const [petra] = await db().select().from(users).where(eq(users.email, 'physician2@larkspur.test'));
		expect(vancoAgent.code).toBe('J01XA01');
		expect(vanco).toMatchObject({ doseMg: 1250, intervalH: 12, infusionH: 1.5, route: 'iv', status: 'active', prescriberId: petra.id });
		const mero = await orderBySource('fx-rx-2');
		const [meroAgent] = await db().select().from(agents).where(eq(agents.id, mero.agentId));
		const [anselm] = await db().select().from(users).where(eq(users.email, 'physician@larkspur.test'));
		// RxNorm 29561; 1 g three times a day → 1,000 mg every 8 h; 30 min infusion
		expect(meroAgent.code).toBe('J01DH02');
		expect(mero).toMatchObject({ doseMg: 1000, intervalH: 8, infusionH: 0.5, prescriberId: anselm.id, encounterId: icu.id });

		expect(await queuedOrderIds()).toEqual([vanco.id, mero.id].sort());
		expect(await drainReassess()).toBe(2);
		for (const o of [vanco, mero]) {
			const stored = await db().select().from(assessments).where(eq(assessments.orderId, o.id));
			expect(stored).toHaveLength(1);
			expect(assessmentTrace(stored[0]).steps.length).toBeGreaterThan(10);
			expect(stored[0].result).not.toHaveProperty('trace');
		}
	});

	it('passes the normalised facts to the clinical core (Cockcroft–Gault by hand)', async () => {
		const vanco = await orderBySource('fx-rx-1');
		const { stored } = await reassessOrders([vanco.id], { now: new Date('2026-11-27T08:00:00Z') });
		const a = stored[0].assessment;
		// 75-year-old woman, 162 cm, 68 kg, SCr 1.6 mg/dL (latest at 06:10). Devine IBW = 45.5 + 2.3 × (162/2.54 − 60)
		// = 54.19 kg; 68 kg > 1.2 × IBW, so adjusted weight 54.19 + 0.4 × (68 − 54.19) = 59.72 kg (common practice);
		// CrCl = (140 − 75) × 59.72 / (72 × 1.6) × 0.85 = 28.6 mL/min (Cockcroft DW, Gault MH, Nephron 1976;16:31–41)
		expect(a.covariates.ageYears).toBe(75);
		expect(a.covariates.dosingWeightKg).toBeCloseTo(59.72, 1);
		expect(a.creatinine.latestMgDl).toBe(1.6);
		expect(a.renal.crclMlMin).toBeCloseTo(28.6, 1);
		// albumin 3.1 g/dL arrived as 31 g/L
		expect(a.albumin.latestGL).toBe(31);
		expect(stored[0].lastResultAt?.toISOString()).toBe('2026-11-27T06:10:00.000Z');
		const [row] = await db().select().from(assessments).where(eq(assessments.id, stored[0].assessmentId));
		expect(row.crclMlMin).toBeCloseTo(28.6, 1);
		expect(row.albuminGL).toBe(31);
		// kept as its inputs, not its trace; the trace re-run from them is the one computed at the time
		expect(row.trace).toBeNull();
		expect(row.input?.creatinine.at(-1)).toEqual([Date.parse('2026-11-27T06:10:00Z'), 1.6, 'mg/dL']);
		const rerun = assessmentTrace(row);
		expect(rerun.note).toBeNull();
		expect(rerun.steps).toEqual(a.trace);
		expect(rerun.steps.find((s) => s.key === 'crcl')?.value).toBeCloseTo(28.6, 1);
		// a stored result the re-run no longer reproduces is said to differ, not silently replaced
		const altered = { ...row, result: { ...row.result, renal: { ...row.result.renal, crclMlMin: 99 } } };
		expect(assessmentTrace(altered).note).toBe(TRACE_DIFFERS_NOTE);
	});

	it('stores morning results addressed by MRN and by absolute reference (collection)', async () => {
		const result = await ingestFixtureBundle('fixtures/feed/morning-results-bundle.json');
		expect(result.counts).toEqual({ accepted: 3, duplicate: 0, quarantined: 0 });
		const vanco = await orderBySource('fx-rx-1');
		const mero = await orderBySource('fx-rx-2');
		expect(await queuedOrderIds()).toEqual([vanco.id, mero.id].sort());
		expect(await drainReassess()).toBe(2);
	});

	it('updates, stops and starts orders (batch); a stopped order is assessed once more at its stop time', async () => {
		const result = await ingestFixtureBundle('fixtures/feed/order-changes-bundle.json');
		expect(result.entries.map((e) => [e.id, e.outcome, e.detail])).toEqual([
			['fx-rx-1', 'accepted', 'updated'],
			['fx-rx-2', 'accepted', 'stopped'],
			['fx-rx-3', 'accepted', 'created']
		]);
		const vanco = await orderBySource('fx-rx-1');
		expect(vanco).toMatchObject({ doseMg: 1000, intervalH: 24, status: 'active' });
		const mero = await orderBySource('fx-rx-2');
		expect(mero.status).toBe('stopped');
		expect(mero.stoppedAt?.toISOString()).toBe('2026-11-28T10:00:00.000Z');
		const tazo = await orderBySource('fx-rx-3');
		const [tazoAgent] = await db().select().from(agents).where(eq(agents.id, tazo.agentId));
		// 4.5 g at 9,000 mg/h is a 0.5-h infusion
		expect(tazoAgent.code).toBe('J01CR05');
		expect(tazo).toMatchObject({ doseMg: 4500, intervalH: 6, infusionH: 0.5 });
		expect(await drainReassess()).toBe(3);
		const [stoppedAssessment] = await db().select().from(assessments).where(eq(assessments.orderId, mero.id)).orderBy(assessments.createdAt).limit(1).offset(2);
		expect(stoppedAssessment.at.toISOString()).toBe('2026-11-28T10:00:00.000Z');
	});
});

describe('CSV files from fixtures/feed', () => {
	it('stores lab results, creating the patient from the patient columns', async () => {
		const result = await ingestFixtureCsv('results', 'fixtures/feed/lab-results.csv');
		expect(result.counts).toEqual({ accepted: 6, duplicate: 0, quarantined: 0 });
		expect(result.entries.map((e) => e.index)).toEqual([2, 3, 4, 5, 6, 7]);
		const [p3] = await db().select().from(patients).where(eq(patients.mrn, 'FX0000003'));
		expect(p3).toMatchObject({ givenName: 'Crispin', familyName: 'Thistlewood', sex: 'male', birthDate: '1968-09-30', sourceId: null });
		const [cr2] = await db().select().from(labResults).where(eq(labResults.sourceId, 'fx-csv-3-cr2'));
		// 121 µmol/L ÷ 88.4 = 1.369 mg/dL (KDIGO 2012)
		expect(cr2.valueNormalised).toBeCloseTo(121 / 88.4, 5);
		const p1 = await patientBySource('fx-p-1');
		const albumins = await db().select().from(labResults).where(eq(labResults.patientId, p1.id));
		expect(albumins.some((l) => l.analyte === 'albumin' && l.valueNormalised === 29)).toBe(true);
		// fx-p-1's active order (vancomycin) was queued by its new albumin; FX0000003 has no order yet
		expect(await queuedOrderIds()).toEqual([(await orderBySource('fx-rx-1')).id]);
		await drainReassess();
	});

	it('stores orders with their admission; agents by name, synonym and ATC code', async () => {
		const result = await ingestFixtureCsv('orders', 'fixtures/feed/orders.csv');
		expect(result.counts).toEqual({ accepted: 3, duplicate: 0, quarantined: 0 });
		const cipro = await orderBySource('fx-csv-rx-1');
		const vanco = await orderBySource('fx-csv-rx-2');
		const cro = await orderBySource('fx-csv-rx-3');
		const codeOf = async (agentId: string) => (await db().select({ code: agents.code }).from(agents).where(eq(agents.id, agentId)))[0].code;
		expect([await codeOf(cipro.agentId), await codeOf(vanco.agentId), await codeOf(cro.agentId)]).toEqual(['J01MA02', 'J01XA01', 'J01DD04']);
		// oral: no infusion; IV without infusion_h: the agent's usual infusion time (vancomycin 1.5 h in the library)
		expect(cipro).toMatchObject({ route: 'po', infusionH: 0, doseMg: 500, intervalH: 12, prescriberName: 'Dr Caspian Muir' });
		expect(vanco.infusionH).toBe(1.5);
		expect(cro.prescriberName).toBe('Dr Anselm Okafor-Lind');
		const [enc] = await db()
			.select()
			.from(encounters)
			.where(eq(encounters.id, cipro.encounterId as string));
		expect(enc).toMatchObject({ ward: '4 West Respiratory', bed: '4W-03' });
		expect(await drainReassess()).toBe(3);
	});

	it('leaves every active order with an assessment newer than its newest result', async () => {
		const active = await db().select().from(orders).where(eq(orders.status, 'active'));
		expect(active.length).toBe(5);
		for (const o of active) {
			const results = await db().select({ createdAt: labResults.createdAt }).from(labResults).where(eq(labResults.patientId, o.patientId));
			const newest = Math.max(...results.map((r) => r.createdAt.getTime()));
			const done = await db().select({ createdAt: assessments.createdAt }).from(assessments).where(eq(assessments.orderId, o.id));
			expect(Math.max(...done.map((d) => d.createdAt.getTime()))).toBeGreaterThan(newest);
		}
	});
});
