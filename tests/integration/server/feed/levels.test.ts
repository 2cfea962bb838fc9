// Doses given and measured drug levels through the feed: FHIR MedicationAdministration and drug-level
// Observations, and their CSV files. Good entries are stored (in mg and mg/L) and re-assess the order;
// every bad one gets an outcome that names the field, and is kept in quarantine.
import { asc, eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { drugLevels, medicationAdministrations, orders, quarantine } from '../../../../src/lib/server/db/schema';
import { measuredDosing } from '../../../../src/lib/server/levels';
import { stopBoss } from '../../../../src/lib/server/queue';
import { drainReassess, fixture, ingestFixtureBundle, ingestFixtureCsv, ingestText, queuedOrderIds, tableCount, withAgents } from './helpers';

const NOW = new Date('2026-11-28T18:00:00Z');
const at = { now: NOW };

const bundleOf = (...resources: object[]) => JSON.stringify({ resourceType: 'Bundle', type: 'batch', entry: resources.map((resource) => ({ resource })) });
const level = (id: string, code: string, value: number, unit: string, when = '2026-11-28T08:00:00Z', subject = 'Patient/fx-p-1') => ({
	resourceType: 'Observation',
	id,
	status: 'final',
	code: { coding: [{ system: 'http://loinc.org', code }] },
	subject: { reference: subject },
	effectiveDateTime: when,
	valueQuantity: { value, unit, system: 'http://unitsofmeasure.org', code: unit }
});
const given = (id: string, request: string, start = '2026-11-28T09:00:00Z', dose = { value: 1250, code: 'mg' }, extra: object = {}) => ({
	resourceType: 'MedicationAdministration',
	id,
	status: 'completed',
	medicationCodeableConcept: { coding: [{ system: 'http://www.whocc.no/atc', code: 'J01XA01' }] },
	subject: { reference: 'Patient/fx-p-1' },
	effectiveDateTime: start,
	request: { reference: `MedicationRequest/${request}` },
	dosage: { dose: { ...dose, system: 'http://unitsofmeasure.org' } },
	...extra
});

let vancoOrderId: string;

/** What the kinetics read of the vancomycin order's doses and levels now. */
async function vancoDosing() {
	const [order] = await getDb()
		.select({ id: orders.id, patientId: orders.patientId, agentId: orders.agentId, startAt: orders.startAt, stoppedAt: orders.stoppedAt })
		.from(orders)
		.where(eq(orders.id, vancoOrderId));
	return measuredDosing(order, NOW);
}

beforeAll(async () => {
	await withAgents();
	await ingestFixtureBundle('fixtures/feed/admission-bundle.json', at);
	await ingestFixtureCsv('orders', 'fixtures/feed/orders.csv', at);
	await drainReassess();
	const [o] = await getDb().select().from(orders).where(eq(orders.sourceId, 'fx-rx-1'));
	vancoOrderId = o.id;
});
afterAll(stopBoss);

describe('FHIR administrations and levels', () => {
	it('stores the fixture bundle: doses in mg with their infusion end, levels in mg/L, and re-assesses the order', async () => {
		const result = await ingestFixtureBundle('fixtures/feed/levels-bundle.json', at);
		expect(result.counts).toEqual({ accepted: 6, duplicate: 0, quarantined: 0 });
		expect(result.entries.map((e) => e.resourceType)).toEqual([
			'MedicationAdministration',
			'MedicationAdministration',
			'MedicationAdministration',
			'Observation',
			'Observation',
			'Observation'
		]);
		const doses = await getDb().select().from(medicationAdministrations).orderBy(asc(medicationAdministrations.startAt));
		expect(doses.map((d) => [d.sourceId, d.doseMg, d.doseUnit, d.orderId, d.startAt.toISOString(), d.endAt?.toISOString()])).toEqual([
			['fx-ma-1', 1250, 'mg', vancoOrderId, '2026-11-26T09:00:00.000Z', '2026-11-26T10:30:00.000Z'],
			// 1.25 g at 1000 mg/h: 75 minutes
			['fx-ma-2', 1250, 'g', vancoOrderId, '2026-11-26T21:05:00.000Z', '2026-11-26T22:20:00.000Z'],
			// no end and no rate: the order's 1.5 h infusion
			['fx-ma-3', 1250, 'mg', vancoOrderId, '2026-11-27T09:10:00.000Z', '2026-11-27T10:40:00.000Z']
		]);
		const levels = await getDb().select().from(drugLevels).orderBy(asc(drugLevels.observedAt));
		expect(levels.map((l) => [l.sourceId, l.loinc, l.timing, l.value, l.unit, l.valueMgL])).toEqual([
			['fx-lv-3', '35668-3', 'random', 1.4, 'mg/L', 1.4],
			['fx-lv-1', '4092-3', 'trough', 11.8, 'mg/L', 11.8],
			['fx-lv-2', '20578-1', 'random', 24.6, 'ug/mL', 24.6]
		]);
		// the vancomycin levels have an order; the gentamicin level's patient has none, and the outcome says so
		expect(result.entries[3].notes).toBeUndefined();
		expect(result.entries[5].notes?.join(' ')).toContain('no Gentamicin order was found for this patient');
		expect(await queuedOrderIds()).toContain(vancoOrderId);
		await drainReassess();
		const dosing = await vancoDosing();
		expect(dosing.administrations).toHaveLength(3);
		expect(dosing.levels.map((l) => l.mgL)).toEqual([11.8, 24.6]);
	});

	it('re-sending the bundle, or its resources in another message, changes nothing and queues nothing', async () => {
		const again = await ingestFixtureBundle('fixtures/feed/levels-bundle.json', at);
		expect(again.duplicateMessage).toBe(true);
		const bundle = JSON.parse(fixture('fixtures/feed/levels-bundle.json'));
		bundle.type = 'collection';
		const other = await ingestText(JSON.stringify(bundle), at);
		expect(other.duplicateMessage).toBe(false);
		expect(other.counts).toEqual({ accepted: 0, duplicate: 6, quarantined: 0 });
		expect(other.ordersQueued).toBe(0);
		expect(await tableCount('medication_administrations')).toBe(3);
		expect(await tableCount('drug_levels')).toBe(3);
	});

	it('a corrected level updates the stored one', async () => {
		const result = await ingestText(bundleOf(level('fx-lv-1', '4092-3', 12.1, 'mg/L', '2026-11-27T08:40:00Z')), at);
		expect(result.entries[0]).toMatchObject({ outcome: 'accepted', detail: 'updated' });
		const [row] = await getDb().select().from(drugLevels).where(eq(drugLevels.sourceId, 'fx-lv-1'));
		expect(row.valueMgL).toBe(12.1);
	});

	it('quarantines wrong units, unknown codes, future times and unknown orders, naming the field; stores nothing of them', async () => {
		const before = [await tableCount('drug_levels'), await tableCount('medication_administrations')];
		const result = await ingestText(
			bundleOf(
				level('bad-unit', '4092-3', 8.2, 'umol/L'),
				level('bad-code', '4091-5', 8.2, 'mg/L'),
				level('bad-future', '3665-7', 0.8, 'mg/L', '2026-11-29T08:00:00Z'),
				level('bad-absurd', '4092-3', 1180, 'mg/L'),
				given('bad-order', 'no-such-order'),
				given('bad-dose', 'fx-rx-1', '2026-11-28T09:00:00Z', { value: 250, code: 'mL' }),
				given('bad-when', 'fx-rx-1', '2026-11-29T09:00:00Z'),
				given('bad-agent', 'fx-rx-1', '2026-11-28T09:00:00Z', { value: 1250, code: 'mg' }, { medicationCodeableConcept: { text: 'gentamicin' } }),
				given(
					'bad-rate',
					'fx-rx-1',
					'2026-11-28T09:00:00Z',
					{ value: 1250, code: 'mg' },
					{ dosage: { dose: { value: 1250, code: 'mg' }, rateQuantity: { value: 250, code: 'mL/h' } } }
				)
			),
			at
		);
		expect(result.counts).toEqual({ accepted: 0, duplicate: 0, quarantined: 9 });
		const byId = new Map(result.entries.map((e) => [e.id, e]));
		const expectEntry = (id: string, field: string, text: string) => {
			const e = byId.get(id);
			expect(e, id).toMatchObject({ outcome: 'quarantined', field });
			expect(e?.reason).toContain(text);
		};
		expectEntry('bad-unit', 'valueQuantity.code', "unit 'umol/L' is not a mass concentration");
		expectEntry('bad-code', 'code.coding', 'LOINC 4091-5');
		expectEntry('bad-future', 'effectiveDateTime', 'is in the future');
		expectEntry('bad-absurd', 'valueQuantity.value', 'above the plausible range');
		expectEntry('bad-order', 'request.reference', 'unknown order — MedicationRequest/no-such-order was never received');
		expectEntry('bad-dose', 'dosage.dose.code', "unit 'mL' is not accepted");
		expectEntry('bad-when', 'effectiveDateTime', 'is in the future');
		expectEntry('bad-agent', 'medicationCodeableConcept', 'not the agent of MedicationRequest/fx-rx-1 (Vancomycin)');
		expectEntry('bad-rate', 'dosage.rateQuantity', 'mg/h');
		expect([await tableCount('drug_levels'), await tableCount('medication_administrations')]).toEqual(before);
		const kept = await getDb()
			.select()
			.from(quarantine)
			.where(eq(quarantine.messageId, result.messageId as string));
		expect(kept).toHaveLength(9);
		expect(kept.find((q) => q.field === 'request.reference')?.raw).toMatchObject({ format: 'fhir', resource: { id: 'bad-order' } });
	});

	it('an administration for an order sent in the same bundle is tied to it', async () => {
		const text = JSON.stringify({
			resourceType: 'Bundle',
			type: 'batch',
			entry: [
				{ fullUrl: 'urn:uuid:aa000000-0000-4000-8000-000000000001', resource: given('fx-ma-local', 'ignored', '2026-11-28T10:00:00Z') },
				{
					fullUrl: 'urn:uuid:aa000000-0000-4000-8000-000000000002',
					resource: {
						resourceType: 'MedicationRequest',
						id: 'fx-rx-genta',
						status: 'active',
						medicationCodeableConcept: { coding: [{ system: 'http://www.whocc.no/atc', code: 'J01XA01' }] },
						subject: { reference: 'Patient/fx-p-1' },
						authoredOn: '2026-11-28T09:30:00Z',
						dosageInstruction: [
							{
								route: { coding: [{ system: 'http://snomed.info/sct', code: '47625008' }] },
								timing: { repeat: { period: 24, periodUnit: 'h' } },
								doseAndRate: [{ doseQuantity: { value: 1000, code: 'mg' } }]
							}
						]
					}
				}
			]
		});
		const bundle = JSON.parse(text);
		bundle.entry[0].resource.request = { reference: 'urn:uuid:aa000000-0000-4000-8000-000000000002' };
		const result = await ingestText(JSON.stringify(bundle), at);
		expect(result.counts).toEqual({ accepted: 2, duplicate: 0, quarantined: 0 });
		const [row] = await getDb().select().from(medicationAdministrations).where(eq(medicationAdministrations.sourceId, 'fx-ma-local'));
		const [order] = await getDb().select().from(orders).where(eq(orders.sourceId, 'fx-rx-genta'));
		expect(row.orderId).toBe(order.id);
	});

	it('entered-in-error marks the stored administration (kept, left out of the kinetics) and withdraws a level', async () => {
		await drainReassess();
		const result = await ingestText(
			bundleOf(
				{ resourceType: 'MedicationAdministration', id: 'fx-ma-2', status: 'entered-in-error' },
				{
					resourceType: 'Observation',
					id: 'fx-lv-2',
					status: 'entered-in-error',
					code: { coding: [{ system: 'http://loinc.org', code: '20578-1' }] },
					subject: { reference: 'Patient/fx-p-1' }
				},
				{ resourceType: 'MedicationAdministration', id: 'never-sent', status: 'entered-in-error' }
			),
			at
		);
		expect(result.entries[0]).toMatchObject({ outcome: 'accepted', detail: 'retracted' });
		expect(result.entries[0].notes?.join(' ')).toContain('kept on record');
		expect(result.entries[1]).toMatchObject({ outcome: 'accepted', detail: 'retracted' });
		expect(result.entries[2]).toMatchObject({ outcome: 'quarantined', field: 'id' });
		expect(result.entries[2].reason).toContain('nothing to mark');
		const [row] = await getDb().select().from(medicationAdministrations).where(eq(medicationAdministrations.sourceId, 'fx-ma-2'));
		expect(row.status).toBe('entered-in-error');
		expect(await queuedOrderIds()).toContain(vancoOrderId);
		const dosing = await vancoDosing();
		expect(dosing.administrations.map((a) => a.id)).not.toContain(row.id);
		expect(dosing.levels.map((l) => l.mgL)).toEqual([12.1]);
		// marked twice: nothing changes
		const again = await ingestText(bundleOf({ resourceType: 'MedicationAdministration', id: 'fx-ma-2', status: 'entered-in-error' }), at);
		expect(again.entries[0].outcome).toBe('duplicate');
	});

	it('a dose recorded not-done (held) is stored and reaches the kinetics as not given; on-hold and unknown are quarantined, naming status', async () => {
		await drainReassess();
		const held = given(
			'fx-ma-held',
			'fx-rx-1',
			'2026-11-27T21:00:00Z',
			{ value: 1250, code: 'mg' },
			{ status: 'not-done', statusReason: [{ text: 'held: high trough' }] }
		);
		const result = await ingestText(
			bundleOf(held, given('fx-ma-pending', 'fx-rx-1', '2026-11-28T09:00:00Z', { value: 1250, code: 'mg' }, { status: 'on-hold' }), {
				...given('fx-ma-what', 'fx-rx-1'),
				status: 'unknown'
			}),
			at
		);
		expect(result.entries.map((e) => e.outcome)).toEqual(['accepted', 'quarantined', 'quarantined']);
		expect(result.entries[1]).toMatchObject({ field: 'status' });
		expect(result.entries[1].reason).toContain('not-done if it was not');
		const [row] = await getDb().select().from(medicationAdministrations).where(eq(medicationAdministrations.sourceId, 'fx-ma-held'));
		expect([row.status, row.doseMg, row.startAt.toISOString()]).toEqual(['not-done', 1250, '2026-11-27T21:00:00.000Z']);
		expect(await queuedOrderIds()).toContain(vancoOrderId);
		const dosing = await vancoDosing();
		expect(dosing.administrations.filter((a) => a.notGiven).map((a) => a.id)).toEqual([row.id]);
		expect(dosing.administrations.filter((a) => !a.notGiven).every((a) => a.id !== row.id)).toBe(true);
	});
});

describe('CSV administrations and levels', () => {
	it('stores the fixture files, re-uploading changes nothing', async () => {
		const doses = await ingestFixtureCsv('administrations', 'fixtures/feed/administrations.csv', at);
		expect(doses.counts).toEqual({ accepted: 2, duplicate: 0, quarantined: 0 });
		const levels = await ingestFixtureCsv('levels', 'fixtures/feed/levels.csv', at);
		expect(levels.counts).toEqual({ accepted: 2, duplicate: 0, quarantined: 0 });
		const [row] = await getDb().select().from(drugLevels).where(eq(drugLevels.sourceId, 'fx-csv-lv-2'));
		expect(row).toMatchObject({ loinc: '4090-7', timing: 'peak', unit: 'ug/mL', valueMgL: 31.2 });
		const [second] = await getDb().select().from(medicationAdministrations).where(eq(medicationAdministrations.sourceId, 'fx-csv-ma-2'));
		// no end_at: the order's infusion time (the agent's usual 1.5 h)
		expect(second.endAt?.toISOString()).toBe('2026-11-27T23:30:00.000Z');
		expect((await ingestFixtureCsv('administrations', 'fixtures/feed/administrations.csv', at)).duplicateMessage).toBe(true);
		expect((await ingestFixtureCsv('levels', 'fixtures/feed/levels.csv', at)).duplicateMessage).toBe(true);
	});

	it('names the column of every bad row and keeps it in quarantine', async () => {
		const { parseCsvText, ingestCsvRows } = await import('../../../../src/lib/server/feed');
		const levelsCsv = parseCsvText(
			[
				'mrn,test,value,unit,observed_at,level_id',
				'FX0000003,vancomycin trough,9.6,mmol/L,2026-11-28T09:30:00Z,c-1',
				'FX0000003,teicoplanin trough,9.6,mg/L,2026-11-28T09:30:00Z,c-2',
				'FX0000003,gentamicin peak,7.5,mg/L,2027-01-01T09:30:00Z,c-3',
				'FX0000001,tobramycin random,1.1,mg/L,2026-11-28T09:30:00Z,c-4'
			].join('\n')
		);
		const lv = await ingestCsvRows('levels', levelsCsv.header, levelsCsv.rows, {
			source: 'csv',
			actor: { actorId: null, actorLabel: 'test', requestId: null },
			now: NOW
		});
		expect(lv.entries.map((e) => [e.index, e.outcome, e.field ?? null])).toEqual([
			[2, 'quarantined', 'unit'],
			[3, 'quarantined', 'test'],
			[4, 'quarantined', 'observed_at'],
			[5, 'accepted', null]
		]);
		expect(lv.entries[3].notes?.join(' ')).toContain('no Tobramycin order was found');
		const dosesCsv = parseCsvText(
			[
				'mrn,order_id,administration_id,dose_mg,start_at,end_at,agent,status',
				'FX0000003,RX-nope,c-ma-1,1000,2026-11-28T09:00:00Z,,,completed',
				'FX0000003,fx-csv-rx-2,fx-csv-ma-1,,,,,entered-in-error',
				'FX0000003,fx-csv-rx-2,fx-csv-ma-held,1500,2026-11-28T10:00:00Z,,,not-done',
				'FX0000003,fx-csv-rx-2,fx-csv-ma-odd,1500,2026-11-28T10:00:00Z,,,held'
			].join('\n')
		);
		const ma = await ingestCsvRows('administrations', dosesCsv.header, dosesCsv.rows, {
			source: 'csv',
			actor: { actorId: null, actorLabel: 'test', requestId: null },
			now: NOW
		});
		expect(ma.entries[0]).toMatchObject({ outcome: 'quarantined', field: 'order_id' });
		expect(ma.entries[0].reason).toContain('unknown order — order RX-nope was never received');
		expect(ma.entries[1]).toMatchObject({ outcome: 'accepted', detail: 'retracted' });
		expect(ma.entries[2]).toMatchObject({ outcome: 'accepted' });
		const [held] = await getDb().select().from(medicationAdministrations).where(eq(medicationAdministrations.sourceId, 'fx-csv-ma-held'));
		expect(held.status).toBe('not-done');
		expect(ma.entries[3]).toMatchObject({ outcome: 'quarantined', field: 'status' });
		expect(ma.entries[3].reason).toContain('not-done (the dose was not given)');
		const kept = await getDb().select().from(quarantine).where(eq(quarantine.source, 'csv'));
		expect(kept.map((q) => q.field).sort()).toEqual(['observed_at', 'order_id', 'status', 'test', 'unit']);
	});
});
