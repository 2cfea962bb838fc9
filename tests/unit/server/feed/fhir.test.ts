// FHIR R4 reading without a database: the bundle envelope, references, dosage arithmetic and the
// records each resource becomes.
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import { bundleSchema, parseEntries, parseReference, routeFrom } from '../../../../src/lib/server/feed';
import type { OrderRecord, ResultRecord } from '../../../../src/lib/server/feed';
import { fixtureIndex, NOW } from './helpers';

const fixture = (path: string) => JSON.parse(readFileSync(new URL(`../../../../${path}`, import.meta.url), 'utf8'));
const ctx = { now: NOW, agents: fixtureIndex() };

describe('bundle envelope', () => {
	it('accepts transaction, batch and collection bundles', () => {
		for (const type of ['transaction', 'batch', 'collection']) {
			expect(bundleSchema.safeParse({ resourceType: 'Bundle', type, entry: [{}] }).success).toBe(true);
		}
	});
	it('names the field at fault', () => {
		const r = bundleSchema.safeParse({ resourceType: 'Bundle', type: 'history', entry: [{}] });
		expect(!r.success && r.error.issues[0].path).toEqual(['type']);
	});
});

describe('references', () => {
	it('reads relative, absolute, versioned, bundle-local and identifier references', () => {
		expect(parseReference({ reference: 'Patient/p1' })).toEqual({ kind: 'typed', type: 'Patient', id: 'p1' });
		expect(parseReference({ reference: 'https://ehr.example/fhir/Patient/p1/_history/3' })).toEqual({ kind: 'typed', type: 'Patient', id: 'p1' });
		expect(parseReference({ reference: 'urn:uuid:abc' })).toEqual({ kind: 'local', url: 'urn:uuid:abc' });
		expect(parseReference({ identifier: { value: 'MRN1' } })).toEqual({ kind: 'identifier', value: 'MRN1' });
		expect(parseReference({ reference: 'nonsense' })).toBeNull();
	});
	it('reads the route from SNOMED CT codes or words', () => {
		expect(routeFrom({ coding: [{ code: '26643006' }] })).toBe('po');
		expect(routeFrom({ text: 'Intravenous' })).toBe('iv');
		expect(routeFrom({ text: 'subcutaneous' })).toBeNull();
	});
});

describe('the fixture bundles', () => {
	it('turn into records: patients first, bundle-local references resolved to the patient', () => {
		const { records, rejections } = parseEntries(fixture('fixtures/feed/admission-bundle.json').entry, ctx);
		expect(rejections).toEqual([]);
		expect(records.map((r) => r.kind)).toEqual([
			'patient',
			'patient',
			'encounter',
			'result',
			'result',
			'result',
			'result',
			'result',
			'order',
			'encounter',
			'result',
			'result',
			'result',
			'result',
			'order'
		]);
		const mero = records.find((r) => r.kind === 'order' && r.sourceId === 'fx-rx-2') as OrderRecord;
		// 3 times per 1 day = every 8 h; 30 min = 0.5 h; 1 g = 1,000 mg
		expect(mero).toMatchObject({ intervalH: 8, infusionH: 0.5, doseMg: 1000, encounterSourceId: 'fx-e-2' });
		expect(mero.prescriber).toMatchObject({ kind: 'email', email: 'physician@larkspur.test' });
		expect(mero.patient).toEqual({ sourceId: 'fx-p-2', mrn: 'FX0000002', label: 'urn:uuid:6a1f0c52-0001-4e7b-9a10-000000000009', field: 'subject.reference' });
	});
	it('read an infusion time from a rate and an order stop without its dosage', () => {
		const { records, rejections } = parseEntries(fixture('fixtures/feed/order-changes-bundle.json').entry, ctx);
		expect(rejections).toEqual([]);
		expect(records[1]).toEqual({ kind: 'stop', index: 1, primary: true, sourceId: 'fx-rx-2', stoppedAt: new Date('2026-11-28T10:00:00Z') });
		// 4.5 g at 9,000 mg/h takes 0.5 h
		expect((records[2] as OrderRecord).infusionH).toBe(0.5);
	});
	it('give a result without an id a stable id from its content', () => {
		const bundle = fixture('fixtures/feed/morning-results-bundle.json');
		delete bundle.entry[0].resource.id;
		delete bundle.entry[0].fullUrl;
		const a = parseEntries(bundle.entry, ctx).records[0] as ResultRecord;
		const b = parseEntries(structuredClone(bundle).entry, ctx).records[0] as ResultRecord;
		expect(a.sourceId).toMatch(/^h:[0-9a-f]{32}$/);
		expect(b.sourceId).toBe(a.sourceId);
	});
});
