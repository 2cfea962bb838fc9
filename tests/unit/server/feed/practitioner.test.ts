// Reading the prescriber directory without a database: e-mail addresses from telecom, names,
// Practitioner and PractitionerRole entries, identifiers that clash within a message, the requester
// of an order, and the CSV prescriber columns.
import { readFileSync } from 'node:fs';
import { describe, expect, it } from 'vitest';
import {
	prescriberOf,
	parseEntries,
	emailFromTelecom,
	emptyDirectory,
	humanNameText,
	PRACTITIONER_ID_SYSTEM,
	readEmailAddress,
	readPractitioner,
	readRequester
} from '../../../../src/lib/server/feed';
import type { OrderRecord, PractitionerRecord, PractitionerRoleRecord } from '../../../../src/lib/server/feed';
import { fixtureIndex, NOW } from './helpers';

const fixture = (path: string) => JSON.parse(readFileSync(new URL(`../../../../${path}`, import.meta.url), 'utf8'));
const ctx = { now: NOW, agents: fixtureIndex() };
const entry = (resource: Record<string, unknown>, index = 0, fullUrl: string | null = null) => ({ index, fullUrl, resource });
const practitioner = (extra: Record<string, unknown>) => ({ resourceType: 'Practitioner', name: [{ given: ['Nell'], family: 'Birchall' }], ...extra });

describe('e-mail addresses', () => {
	it('are read in lower case, without mailto:, and refused with the text when they are not addresses', () => {
		expect(readEmailAddress(' Nell.Birchall@Larkspur.TEST ')).toEqual({ ok: true, email: 'nell.birchall@larkspur.test' });
		expect(readEmailAddress('mailto:nell@larkspur.test')).toEqual({ ok: true, email: 'nell@larkspur.test' });
		expect(readEmailAddress('abc')).toEqual({ ok: false, problem: "'abc' is not an e-mail address" });
		expect(readEmailAddress('nell at larkspur.test')).toMatchObject({ ok: false });
		expect(readEmailAddress('nell@')).toMatchObject({ ok: false });
		expect(readEmailAddress('  ')).toEqual({ ok: false, problem: 'the e-mail address is empty' });
	});

	it('come from telecom entries with system email: work before others, an old one last, the first usable one', () => {
		expect(emailFromTelecom(undefined)).toEqual({ email: null, problem: 'no e-mail in telecom' });
		expect(emailFromTelecom([{ system: 'phone', value: 'ext. 1' }])).toEqual({ email: null, problem: 'no e-mail in telecom' });
		expect(emailFromTelecom([{ system: 'email', value: 'abc' }])).toEqual({ email: null, problem: "'abc' is not an e-mail address" });
		expect(
			emailFromTelecom([
				{ system: 'email', value: 'old@larkspur.test', use: 'old' },
				{ system: 'email', value: 'home@larkspur.test', use: 'home' },
				{ system: 'email', value: 'work@larkspur.test', use: 'work' }
			])
		).toEqual({ email: 'work@larkspur.test', problem: null });
		expect(
			emailFromTelecom([
				{ system: 'Email', value: 'not one', use: 'work' },
				{ system: 'email', value: 'second@larkspur.test' }
			])
		).toEqual({ email: 'second@larkspur.test', problem: null });
	});
});

describe('names', () => {
	it('prefer the official name, then its text, else prefix, given and family names', () => {
		expect(humanNameText(undefined)).toBeNull();
		expect(
			humanNameText([
				{ use: 'nickname', text: 'Nellie' },
				{ use: 'official', prefix: ['Dr'], given: ['Nell', 'A.'], family: 'Birchall' }
			])
		).toBe('Dr Nell A. Birchall');
		expect(humanNameText([{ text: ' Dr N. Birchall ' }])).toBe('Dr N. Birchall');
		expect(humanNameText([{}])).toBeNull();
	});
});

describe('Practitioner', () => {
	it('becomes a record with its identifiers, its resource id as an identifier, and the e-mail or why there is none', () => {
		const read = readPractitioner(
			entry(
				practitioner({
					id: 'pr-1',
					identifier: [{ system: 'urn:staff', value: ' S-1 ' }, { system: 'urn:staff', value: 'S-1' }, { value: 'GMC-77' }],
					telecom: [{ system: 'phone', value: '1' }]
				}),
				3
			)
		) as PractitionerRecord;
		expect(read).toMatchObject({
			kind: 'practitioner',
			index: 3,
			key: 'Practitioner/pr-1',
			name: 'Nell Birchall',
			named: true,
			email: null,
			emailProblem: 'no e-mail in telecom'
		});
		expect(read.identifiers.map(({ system, value }) => ({ system, value }))).toEqual([
			{ system: 'urn:staff', value: 'S-1' },
			{ system: '', value: 'GMC-77' },
			{ system: PRACTITIONER_ID_SYSTEM, value: 'pr-1' }
		]);
	});

	it('without a name but with an identifier is kept under a stand-in name; without either it is refused naming the field', () => {
		const unnamed = readPractitioner(
			entry({ resourceType: 'Practitioner', identifier: [{ system: 'urn:staff', value: 'S-9' }] }, 0, 'urn:uuid:x')
		) as PractitionerRecord;
		expect(unnamed).toMatchObject({ name: 'Prescriber S-9', named: false, key: 'urn:uuid:x' });
		expect(readPractitioner(entry({ resourceType: 'Practitioner', id: 'only-id', telecom: [{ system: 'email', value: 'a@b.test' }] }))).toMatchObject({
			field: 'name',
			reason: expect.stringContaining('name and identifier are both missing')
		});
	});

	it('with malformed telecom or identifiers is refused naming the field', () => {
		expect(readPractitioner(entry(practitioner({ telecom: 'a@b.test' })))).toEqual({ field: 'telecom', reason: 'telecom must be a list of ContactPoints' });
		expect(readPractitioner(entry(practitioner({ telecom: ['a@b.test'] })))).toEqual({
			field: 'telecom[0]',
			reason: 'telecom[0] must be a ContactPoint (system, value)'
		});
		expect(readPractitioner(entry(practitioner({ telecom: [{ system: 'email', value: 42 }] })))).toEqual({
			field: 'telecom[0].value',
			reason: 'telecom[0].value must be a string'
		});
		expect(readPractitioner(entry(practitioner({ identifier: [{ system: 'urn:staff', value: ' ' }] })))).toEqual({
			field: 'identifier[0].value',
			reason: 'identifier[0].value is empty'
		});
		expect(readPractitioner(entry(practitioner({ identifier: [{ system: 'urn:staff' }] })))).toEqual({
			field: 'identifier[0].value',
			reason: 'identifier[0].value is required'
		});
	});
});

describe('a message with prescribers', () => {
	it('the example bundle is read without a rejection: requesters point at Practitioner entries, directly or through a PractitionerRole', () => {
		const { records, rejections } = parseEntries(fixture('fixtures/feed/prescribers-bundle.json').entry, ctx);
		expect(rejections).toEqual([]);
		const orders = records.filter((r): r is OrderRecord => r.kind === 'order');
		expect(orders.map((o) => o.prescriber)).toEqual([
			{ kind: 'entry', index: 0, label: 'requester.reference Practitioner/fx-pr-1' },
			{ kind: 'entry', index: 2, label: 'requester.reference PractitionerRole/fx-role-3' },
			{ kind: 'entry', index: 1, label: 'requester.reference urn:uuid:4c2e9b10-7d31-4f0a-8e55-000000000002' }
		]);
		const roles = records.filter((r): r is PractitionerRoleRecord => r.kind === 'practitioner-role');
		expect(roles[0]).toMatchObject({
			sourceKey: 'PractitionerRole/fx-role-1',
			role: 'Consultant',
			specialty: 'Infectious diseases',
			organization: 'Larkspur Bay Hospital',
			email: 'id-consult@larkspur.test',
			active: true
		});
	});

	it('refuses the later of two different Practitioners with one identifier, and the order pointing at it keeps no prescriber', () => {
		const ident = [{ system: 'urn:staff', value: 'S-5' }];
		const { records, rejections } = parseEntries(
			[
				{ fullUrl: 'urn:uuid:a', resource: practitioner({ id: 'a', identifier: ident }) },
				{ fullUrl: 'urn:uuid:a-again', resource: practitioner({ id: 'a', identifier: ident }) },
				{ fullUrl: 'urn:uuid:b', resource: practitioner({ id: 'b', identifier: ident }) },
				{ resource: { resourceType: 'PractitionerRole', id: 'r-b', practitioner: { reference: 'urn:uuid:b' } } }
			],
			ctx
		);
		// the same Practitioner twice is no clash
		expect(records.filter((r) => r.kind === 'practitioner').map((r) => r.index)).toEqual([0, 1]);
		expect(rejections).toEqual([
			{
				index: 2,
				resourceType: 'Practitioner',
				sourceId: 'b',
				field: 'identifier[0]',
				reason: 'identifier[0] urn:staff|S-5 also names Practitioner/a (entry 0) in this message: one identifier must name one prescriber'
			},
			{
				index: 3,
				resourceType: 'PractitionerRole',
				sourceId: 'r-b',
				field: 'practitioner',
				reason: expect.stringContaining('points at a Practitioner entry that was quarantined')
			}
		]);
	});
});

describe('the requester of an order', () => {
	const local = emptyDirectory();
	it('names a Practitioner or PractitionerRole on record by id, or by identifier', () => {
		expect(readRequester({ reference: 'Practitioner/p-9' }, local).ref).toEqual({
			kind: 'identifier',
			identifier: { system: PRACTITIONER_ID_SYSTEM, value: 'p-9' },
			anySystem: false,
			label: 'requester Practitioner/p-9'
		});
		expect(readRequester({ reference: 'PractitionerRole/r-9' }, local).ref).toMatchObject({ kind: 'role', sourceKey: 'PractitionerRole/r-9' });
		expect(readRequester({ identifier: { system: 'urn:staff', value: 'S-1' } }, local).ref).toMatchObject({
			kind: 'identifier',
			identifier: { system: 'urn:staff', value: 'S-1' },
			anySystem: false
		});
		expect(readRequester({ identifier: { value: 'S-1' } }, local).ref).toMatchObject({ kind: 'identifier', anySystem: true });
	});

	it('names a prescriber by e-mail when the identifier is an address without a system', () => {
		expect(readRequester({ identifier: { value: 'Physician@Larkspur.test' }, display: 'Dr A' }, local).ref).toEqual({
			kind: 'email',
			email: 'physician@larkspur.test',
			name: 'Dr A',
			label: 'requester.identifier Physician@Larkspur.test'
		});
	});

	it('says why when it names nobody Ebbline can find: no entry, another resource type, a name only', () => {
		expect(readRequester({ reference: 'urn:uuid:gone' }, local)).toEqual({
			ref: null,
			notes: [
				'requester.reference urn:uuid:gone matches no Practitioner or PractitionerRole entry in this message; the order is kept with no prescriber from the directory'
			]
		});
		expect(readRequester({ reference: 'Organization/o-1' }, local).notes[0]).toContain('points at a Organization');
		expect(readRequester({ display: 'Dr Nobody' }, local).notes[0]).toContain('requester gives no reference or identifier');
		expect(readRequester(undefined, local)).toEqual({ ref: null, notes: [] });
	});
});

describe('CSV prescriber columns', () => {
	const row = (values: Record<string, string>) => ({ line: 7, values });
	it('prescriber_email finds the prescriber by address in lower case, with prescriber_name as their name', () => {
		expect(prescriberOf(row({ prescriber_name: 'Dr Nell Birchall', prescriber_email: 'Nell.Birchall@Larkspur.test' }))).toEqual({
			name: 'Dr Nell Birchall',
			ref: { kind: 'email', email: 'nell.birchall@larkspur.test', name: 'Dr Nell Birchall', label: 'prescriber_email nell.birchall@larkspur.test' }
		});
		expect(prescriberOf(row({ prescriber_name: 'Dr Nell Birchall' }))).toEqual({ name: 'Dr Nell Birchall', ref: null });
	});
	it('the older prescriber column still holds a name or an address', () => {
		expect(prescriberOf(row({ prescriber: 'Dr Caspian Muir' }))).toEqual({ name: 'Dr Caspian Muir', ref: null });
		expect(prescriberOf(row({ prescriber: 'physician3@larkspur.test' }))).toMatchObject({
			name: null,
			ref: { kind: 'email', email: 'physician3@larkspur.test' }
		});
	});
	it('a malformed address is a row error naming the column', () => {
		expect(prescriberOf(row({ prescriber_email: 'abc' }))).toEqual({
			line: 7,
			column: 'prescriber_email',
			reason: "prescriber_email 'abc' is not an e-mail address"
		});
		expect(prescriberOf(row({ prescriber: 'a@' }))).toEqual({ line: 7, column: 'prescriber', reason: "prescriber 'a@' is not an e-mail address" });
	});
});
