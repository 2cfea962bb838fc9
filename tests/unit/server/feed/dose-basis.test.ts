// Combination products dosed by one component: co-trimoxazole is dosed as trimethoprim (160/800 mg =
// "960 mg" combined; product information). The feed reads the basis from a UCUM annotation or the CSV
// dose_basis column and never guesses it — a wrong guess is a six-fold error either way.
import { describe, expect, it } from 'vitest';
import { doseInAgentTerms, parseCsvText, parseEntries, prepareCsv } from '../../../../src/lib/server/feed';
import { fixtureIndex, fixtureLibrary, NOW } from './helpers';

const cotrimoxazole = fixtureLibrary().find((a) => a.code === 'J01EE01')!;
const meropenem = fixtureLibrary().find((a) => a.code === 'J01DH02')!;

function orderBundle(code: string) {
	return [
		{
			resource: {
				resourceType: 'Patient',
				id: 'db-p',
				identifier: [{ value: 'DB0001' }],
				name: [{ family: 'Basis', given: ['Dose'] }],
				gender: 'female',
				birthDate: '1960-01-01'
			}
		},
		{
			resource: {
				resourceType: 'MedicationRequest',
				id: 'db-rx',
				status: 'active',
				medicationCodeableConcept: { coding: [{ system: 'http://www.whocc.no/atc', code: 'J01EE01' }] },
				subject: { reference: 'Patient/db-p' },
				authoredOn: '2026-11-30T08:00:00Z',
				dosageInstruction: [
					{ route: { text: 'oral' }, timing: { repeat: { period: 12, periodUnit: 'h' } }, doseAndRate: [{ doseQuantity: { value: 960, unit: code, code } }] }
				]
			}
		}
	];
}

describe('dose basis of a combination product', () => {
	it('the library declares co-trimoxazole dosed as trimethoprim, 6 combined mg per trimethoprim mg', () => {
		expect(cotrimoxazole.combination).toEqual({ component: 'trimethoprim', combinedPerComponent: 6 });
	});

	it('converts a combined dose, keeps a component dose, refuses to guess a plain one', () => {
		expect(doseInAgentTerms(cotrimoxazole, 960, 'combined')).toEqual({ ok: true, doseMg: 160 });
		expect(doseInAgentTerms(cotrimoxazole, 160, 'Trimethoprim')).toEqual({ ok: true, doseMg: 160 });
		const plain = doseInAgentTerms(cotrimoxazole, 960, null);
		expect(plain.ok).toBe(false);
		if (!plain.ok) expect(plain.reason).toContain('mg{trimethoprim}');
		expect(doseInAgentTerms(meropenem, 1000, null)).toEqual({ ok: true, doseMg: 1000 });
		expect(doseInAgentTerms(meropenem, 1000, 'combined').ok).toBe(false);
	});

	it('FHIR: mg{combined} 960 becomes 160 mg; plain mg is quarantined naming the field', () => {
		const ok = parseEntries(orderBundle('mg{combined}'), { now: NOW, agents: fixtureIndex() });
		expect(ok.rejections).toEqual([]);
		expect(ok.records.find((r) => r.kind === 'order')).toMatchObject({ doseMg: 160 });
		const plain = parseEntries(orderBundle('mg'), { now: NOW, agents: fixtureIndex() });
		expect(plain.rejections[0]).toMatchObject({ field: 'dosageInstruction[0].doseAndRate[0].doseQuantity.code' });
		expect(plain.rejections[0].reason).toContain('trimethoprim');
	});

	it('CSV: dose_basis is required for co-trimoxazole and converts a combined dose', () => {
		const csv = (basis: string) =>
			parseCsvText(`mrn,order_id,agent,dose_mg,dose_basis,interval_h,route,start_at\nDB0001,db-1,co-trimoxazole,960,${basis},12,po,2026-11-30T08:00:00Z\n`);
		const combined = csv('combined');
		const prepared = prepareCsv('orders', combined.header, combined.rows, fixtureIndex(), NOW);
		expect(prepared.rejections).toEqual([]);
		expect(prepared.records.find((r) => r.kind === 'order')).toMatchObject({ doseMg: 160 });
		const missing = csv('');
		const refused = prepareCsv('orders', missing.header, missing.rows, fixtureIndex(), NOW);
		expect(refused.rejections[0]).toMatchObject({ field: 'dose_basis' });
	});
});
