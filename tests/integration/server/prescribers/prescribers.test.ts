// The prescriber directory from the feed: Practitioner and PractitionerRole stored idempotently, a
// MedicationRequest's requester linked by reference within the message and by identifier across
// messages, a prescriber without a usable e-mail kept (not quarantined), bad Practitioner entries
// quarantined one by one with the rest of the message kept, accounts linked by e-mail, and CSV
// order uploads with a prescriber_email column.
import { eq, inArray } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { seedUsers } from '../../../../src/lib/server/demo';
import { getDb } from '../../../../src/lib/server/db';
import { orders, prescriberIdentifiers, prescriberRoles, prescribers, quarantine, users } from '../../../../src/lib/server/db/schema';
import { ingestCsvRows, PRACTITIONER_ID_SYSTEM } from '../../../../src/lib/server/feed';
import { prescribers as directory } from '../../../../src/lib/server/prescribers';
import { users as usersService } from '../../../../src/lib/server/auth';
import { stopBoss } from '../../../../src/lib/server/queue';
import { fixture, ingestFixtureBundle, ingestText, system, tableCount, withAgents } from '../feed/helpers';

const STAFF = 'urn:larkspur-bay:staff-id';
const db = () => getDb();

beforeAll(async () => {
	await withAgents();
	await seedUsers();
});
afterAll(stopBoss);

const orderBySource = async (sourceId: string) => (await db().select().from(orders).where(eq(orders.sourceId, sourceId)))[0];
const prescriberById = async (id: string | null) =>
	(
		await db()
			.select()
			.from(prescribers)
			.where(eq(prescribers.id, id as string))
	)[0];
const userByEmail = async (email: string) => (await db().select().from(users).where(eq(users.email, email)))[0];
const directoryCounts = async () => ({
	prescribers: await tableCount('prescribers'),
	identifiers: await tableCount('prescriber_identifiers'),
	roles: await tableCount('prescriber_roles'),
	orders: await tableCount('orders'),
	quarantine: await tableCount('quarantine')
});

function bundle(entries: object[]) {
	return JSON.stringify({ resourceType: 'Bundle', type: 'batch', entry: entries });
}
function practitioner(id: string | null, options: { staffId?: string; name?: [string, string] | null; telecom?: unknown; fullUrl?: string } = {}) {
	return {
		fullUrl: options.fullUrl ?? `urn:uuid:${id}`,
		resource: {
			resourceType: 'Practitioner',
			...(id ? { id } : {}),
			...(options.staffId ? { identifier: [{ system: STAFF, value: options.staffId }] } : {}),
			...(options.name === null
				? {}
				: { name: [{ prefix: ['Dr'], given: [(options.name ?? ['Test', 'Prescriber'])[0]], family: (options.name ?? ['Test', 'Prescriber'])[1] }] }),
			...(options.telecom === undefined ? {} : { telecom: options.telecom })
		}
	};
}
const email = (value: string) => [{ system: 'email', value, use: 'work' }];
function patient(id: string, mrn: string) {
	return {
		fullUrl: `urn:uuid:${id}`,
		resource: {
			resourceType: 'Patient',
			id,
			identifier: [{ system: 'urn:larkspur-bay:mrn', value: mrn }],
			name: [{ family: 'Inchbald', given: ['Saoirse'] }],
			gender: 'female',
			birthDate: '1961-03-14'
		}
	};
}
function order(id: string, patientId: string, requester: object | undefined) {
	return {
		fullUrl: `urn:uuid:${id}`,
		resource: {
			resourceType: 'MedicationRequest',
			id,
			status: 'active',
			intent: 'order',
			medicationCodeableConcept: { coding: [{ system: 'http://www.whocc.no/atc', code: 'J01DD04' }] },
			subject: { reference: `Patient/${patientId}` },
			authoredOn: '2026-11-29T08:00:00Z',
			...(requester ? { requester } : {}),
			dosageInstruction: [
				{
					route: { text: 'IV' },
					timing: { repeat: { frequency: 1, period: 24, periodUnit: 'h', duration: 30, durationUnit: 'min' } },
					doseAndRate: [{ doseQuantity: { value: 2, unit: 'g', code: 'g' } }]
				}
			]
		}
	};
}

describe('Practitioner and PractitionerRole in a bundle', () => {
	it('store the directory and link each order to the prescriber its requester names', async () => {
		const result = await ingestFixtureBundle('fixtures/feed/prescribers-bundle.json');
		expect(result.counts).toEqual({ accepted: 9, duplicate: 0, quarantined: 0 });
		expect(result.entries.slice(0, 5).map((e) => [e.resourceType, e.outcome, e.detail])).toEqual([
			['Practitioner', 'accepted', 'created'],
			['Practitioner', 'accepted', 'created'],
			['Practitioner', 'accepted', 'created'],
			['PractitionerRole', 'accepted', 'created'],
			['PractitionerRole', 'accepted', 'created']
		]);

		// Practitioner/fx-pr-1, with an e-mail: the order carries no name, so the prescriber's is used
		const vanco = await orderBySource('fx-rx-91');
		const hollis = await prescriberById(vanco.practitionerId);
		expect(hollis).toMatchObject({ name: 'Dr Hollis Arkwright', email: 'hollis.arkwright@larkspur.test', emailProblem: null, userId: null });
		expect(vanco).toMatchObject({ prescriberName: 'Dr Hollis Arkwright', prescriberId: null });
		const ids = await db().select().from(prescriberIdentifiers).where(eq(prescriberIdentifiers.prescriberId, hollis.id));
		expect(ids.map((i) => `${i.system}|${i.value}`).sort()).toEqual([`${STAFF}|LBS-90001`, `${PRACTITIONER_ID_SYSTEM}|fx-pr-1`].sort());
		const [role] = await db().select().from(prescriberRoles).where(eq(prescriberRoles.sourceKey, 'PractitionerRole/fx-role-1'));
		expect(role).toMatchObject({
			prescriberId: hollis.id,
			role: 'Consultant',
			specialty: 'Infectious diseases',
			organization: 'Larkspur Bay Hospital',
			email: 'id-consult@larkspur.test',
			active: 'true'
		});

		// requester PractitionerRole/fx-role-3 leads to its practitioner (a fullUrl, no resource id); the order's own name is kept
		const mero = await orderBySource('fx-rx-92');
		expect(await prescriberById(mero.practitionerId)).toMatchObject({ name: 'Dr Emeric Vale', email: 'emeric.vale@larkspur.test' });
		expect(mero.prescriberName).toBe('Dr E. Vale (renal registrar)');

		// a Practitioner with no e-mail is stored and linked, not quarantined
		const cro = await orderBySource('fx-rx-93');
		expect(await prescriberById(cro.practitionerId)).toMatchObject({ name: 'Dr Philippa Strand', email: null, emailProblem: 'no e-mail in telecom' });
		expect(result.entries[1].notes?.join(' ')).toContain('no e-mail in telecom');
		expect(
			await db()
				.select()
				.from(quarantine)
				.where(eq(quarantine.messageId, result.messageId as string))
		).toEqual([]);
	});

	it('re-sending changes nothing: the same message, or the same resources in another message', async () => {
		const before = await directoryCounts();
		const again = await ingestFixtureBundle('fixtures/feed/prescribers-bundle.json');
		expect(again.duplicateMessage).toBe(true);
		// another message (another order of entries) with the same resources: each entry a duplicate
		const reordered = JSON.parse(fixture('fixtures/feed/prescribers-bundle.json'));
		reordered.entry.reverse();
		const resent = await ingestText(JSON.stringify(reordered));
		expect(resent.duplicateMessage).toBe(false);
		expect(resent.counts).toEqual({ accepted: 0, duplicate: 9, quarantined: 0 });
		expect(await directoryCounts()).toEqual(before);
	});

	it('a changed e-mail or name updates the prescriber; a later message without an e-mail keeps the address on record', async () => {
		const before = await directoryCounts();
		const changed = await ingestText(
			bundle([practitioner('fx-pr-1', { staffId: 'LBS-90001', name: ['Hollis', 'Arkwright-Penn'], telecom: email('h.arkwright-penn@larkspur.test') })])
		);
		expect(changed.entries[0]).toMatchObject({ outcome: 'accepted', detail: 'updated' });
		const [row] = await db().select().from(prescribers).where(eq(prescribers.name, 'Dr Hollis Arkwright-Penn'));
		expect(row.email).toBe('h.arkwright-penn@larkspur.test');
		const silent = await ingestText(
			bundle([practitioner('fx-pr-1', { staffId: 'LBS-90001', name: ['Hollis', 'Arkwright-Penn'], telecom: [{ system: 'phone', value: 'ext. 5120' }] })])
		);
		expect(silent.entries[0]).toMatchObject({ outcome: 'duplicate' });
		expect(silent.entries[0].notes?.join(' ')).toContain('the address on record, h.arkwright-penn@larkspur.test, is kept');
		expect((await prescriberById(row.id)).email).toBe('h.arkwright-penn@larkspur.test');
		expect(await directoryCounts()).toEqual(before);
	});

	it('links a requester by identifier and by Practitioner id across messages', async () => {
		const result = await ingestText(
			bundle([
				patient('fx-p-pr-2', 'FXPR00002'),
				order('fx-rx-pr-21', 'fx-p-pr-2', { identifier: { system: STAFF, value: 'LBS-90003' } }),
				order('fx-rx-pr-22', 'fx-p-pr-2', { reference: 'Practitioner/fx-pr-2', display: 'Dr P. Strand' }),
				order('fx-rx-pr-23', 'fx-p-pr-2', { reference: 'https://ehr.larkspur.test/fhir/PractitionerRole/fx-role-1/_history/3' })
			])
		);
		expect(result.counts).toEqual({ accepted: 4, duplicate: 0, quarantined: 0 });
		expect((await prescriberById((await orderBySource('fx-rx-pr-21')).practitionerId)).name).toBe('Dr Emeric Vale');
		const strand = await orderBySource('fx-rx-pr-22');
		expect((await prescriberById(strand.practitionerId)).name).toBe('Dr Philippa Strand');
		expect(strand.prescriberName).toBe('Dr P. Strand');
		expect((await prescriberById((await orderBySource('fx-rx-pr-23')).practitionerId)).name).toBe('Dr Hollis Arkwright-Penn');
	});

	it('keeps an order whose requester names nobody on record, with no prescriber and a note saying so', async () => {
		const result = await ingestText(
			bundle([
				patient('fx-p-pr-3', 'FXPR00003'),
				order('fx-rx-pr-31', 'fx-p-pr-3', { reference: 'Practitioner/never-sent' }),
				order('fx-rx-pr-32', 'fx-p-pr-3', { reference: 'urn:uuid:0b6f0000-0000-4000-8000-00000000dead' }),
				order('fx-rx-pr-33', 'fx-p-pr-3', { reference: 'Organization/larkspur-pharmacy' })
			])
		);
		expect(result.counts).toEqual({ accepted: 4, duplicate: 0, quarantined: 0 });
		expect(result.entries[1].notes?.join(' ')).toContain('requester Practitioner/never-sent matches no prescriber on record');
		expect(result.entries[2].notes?.join(' ')).toContain('matches no Practitioner or PractitionerRole entry in this message');
		expect(result.entries[3].notes?.join(' ')).toContain('points at a Organization');
		for (const id of ['fx-rx-pr-31', 'fx-rx-pr-32', 'fx-rx-pr-33']) expect((await orderBySource(id)).practitionerId).toBeNull();
		// when the Practitioner arrives, re-sending the order links it
		await ingestText(
			bundle([practitioner('never-sent', { staffId: 'LBS-90031', name: ['Alder', 'Whitcombe'], telecom: email('alder.whitcombe@larkspur.test') })])
		);
		const relinked = await ingestText(bundle([order('fx-rx-pr-31', 'fx-p-pr-3', { reference: 'Practitioner/never-sent' })]));
		expect(relinked.entries[0]).toMatchObject({ outcome: 'accepted', detail: 'updated' });
		expect((await prescriberById((await orderBySource('fx-rx-pr-31')).practitionerId)).name).toBe('Dr Alder Whitcombe');
	});

	it('links a prescriber to the active physician account with the same e-mail, in any case, and gives their orders that account', async () => {
		const petra = await userByEmail('physician2@larkspur.test');
		const [inactive] = await db()
			.insert(users)
			.values({ email: 'retired.physician@larkspur.test', displayName: 'Dr Retired', role: 'physician', active: false, passwordHash: 'not-a-hash' })
			.returning();
		await ingestText(
			bundle([
				practitioner('fx-pr-petra', { staffId: 'LBS-90044', name: ['Petra', 'Vasquez-Hale'], telecom: email('PHYSICIAN2@Larkspur.test') }),
				practitioner('fx-pr-retired', { staffId: 'LBS-90045', name: ['Retired', 'Physician'], telecom: email(inactive.email) }),
				patient('fx-p-pr-4', 'FXPR00004'),
				order('fx-rx-pr-41', 'fx-p-pr-4', { reference: 'Practitioner/fx-pr-petra' }),
				order('fx-rx-pr-42', 'fx-p-pr-4', { reference: 'Practitioner/fx-pr-retired' })
			])
		);
		const linked = await orderBySource('fx-rx-pr-41');
		expect(await prescriberById(linked.practitionerId)).toMatchObject({ email: 'physician2@larkspur.test', userId: petra.id });
		expect(linked.prescriberId).toBe(petra.id);
		const notLinked = await orderBySource('fx-rx-pr-42');
		expect((await prescriberById(notLinked.practitionerId)).userId).toBeNull();
		expect(notLinked.prescriberId).toBeNull();
	});

	it('an account an administrator creates later for a prescriber takes over the entry and their orders', async () => {
		await ingestText(
			bundle([
				practitioner('fx-pr-later', { staffId: 'LBS-90046', name: ['Linnea', 'Otterburn'], telecom: email('linnea.otterburn@larkspur.test') }),
				patient('fx-p-pr-5', 'FXPR00005'),
				order('fx-rx-pr-51', 'fx-p-pr-5', { reference: 'Practitioner/fx-pr-later' })
			])
		);
		const before = await orderBySource('fx-rx-pr-51');
		expect(before.prescriberId).toBeNull();
		const created = await usersService.create(
			{ email: 'Linnea.Otterburn@larkspur.test', displayName: 'Dr Linnea Otterburn', role: 'physician', password: 'a long enough password' },
			{ actorId: null, actorLabel: 'test', requestId: null }
		);
		expect((await prescriberById(before.practitionerId)).userId).toBe(created.id);
		expect((await orderBySource('fx-rx-pr-51')).prescriberId).toBe(created.id);
	});

	it('gives a prescriber with no e-mail the address of their active role', async () => {
		const result = await ingestText(
			bundle([
				practitioner('fx-pr-role-mail', { staffId: 'LBS-90051', name: ['Osric', 'Tennant-Lowe'], telecom: [{ system: 'phone', value: 'ext. 6001' }] }),
				{
					fullUrl: 'urn:uuid:fx-role-mail',
					resource: {
						resourceType: 'PractitionerRole',
						identifier: [{ system: 'urn:larkspur-bay:role', value: 'R-51' }],
						active: true,
						practitioner: { reference: 'Practitioner/fx-pr-role-mail' },
						telecom: email('renal-oncall@larkspur.test')
					}
				}
			])
		);
		expect(result.counts.quarantined).toBe(0);
		expect(result.entries[1].notes?.join(' ')).toContain("the role's address renal-oncall@larkspur.test is used");
		const [row] = await db().select().from(prescribers).where(eq(prescribers.name, 'Dr Osric Tennant-Lowe'));
		expect(row).toMatchObject({ email: 'renal-oncall@larkspur.test', emailProblem: null });
		const [role] = await db().select().from(prescriberRoles).where(eq(prescriberRoles.sourceKey, 'urn:larkspur-bay:role|R-51'));
		expect(role.prescriberId).toBe(row.id);
	});
});

describe('bad Practitioner entries', () => {
	it('each get a clear outcome, and nothing else in the message is lost', async () => {
		const result = await ingestText(
			bundle([
				practitioner('bp-telecom', { staffId: 'LBS-B01', name: ['Quinlan', 'Ashdown'], telecom: 'quinlan.ashdown@larkspur.test' }),
				practitioner('bp-first', { staffId: 'LBS-B02', name: ['Rosamund', 'Kell'], telecom: email('rosamund.kell@larkspur.test') }),
				practitioner('bp-second', { staffId: 'LBS-B02', name: ['Sidonie', 'Marr'], telecom: email('sidonie.marr@larkspur.test') }),
				practitioner('bp-not-an-address', { staffId: 'LBS-B04', name: ['Thaddeus', 'Brightwell'], telecom: email('abc') }),
				practitioner('bp-nobody', { name: null, telecom: email('who@larkspur.test') }),
				patient('fx-p-bp', 'FXPRBP001'),
				order('fx-rx-bp-1', 'fx-p-bp', { reference: 'Practitioner/bp-second' }),
				order('fx-rx-bp-2', 'fx-p-bp', { reference: 'urn:uuid:bp-not-an-address' }),
				// an identifier that already names one prescriber on record and a second that names another
				{
					fullUrl: 'urn:uuid:bp-two-owners',
					resource: {
						resourceType: 'Practitioner',
						id: 'bp-two-owners',
						identifier: [
							{ system: STAFF, value: 'LBS-90001' },
							{ system: STAFF, value: 'LBS-90003' }
						],
						name: [{ text: 'Dr Two Owners' }]
					}
				}
			])
		);
		const outcome = (i: number) => result.entries.find((e) => e.index === i);
		expect(outcome(0)).toMatchObject({ outcome: 'quarantined', field: 'telecom', reason: 'telecom must be a list of ContactPoints' });
		expect(outcome(1)).toMatchObject({ outcome: 'accepted', detail: 'created' });
		expect(outcome(2)).toMatchObject({ outcome: 'quarantined', field: 'identifier[0]' });
		expect(outcome(2)?.reason).toContain(`${STAFF}|LBS-B02 also names Practitioner/bp-first (entry 1)`);
		expect(outcome(3)).toMatchObject({ outcome: 'accepted', detail: 'created' });
		expect(outcome(3)?.notes?.join(' ')).toContain("telecom: no usable e-mail ('abc' is not an e-mail address)");
		expect(outcome(4)).toMatchObject({ outcome: 'quarantined', field: 'name' });
		expect(outcome(4)?.reason).toContain('name and identifier are both missing');
		expect(outcome(5)).toMatchObject({ outcome: 'accepted' });
		expect(outcome(6)).toMatchObject({ outcome: 'accepted' });
		expect(outcome(6)?.notes?.join(' ')).toContain('points at a Practitioner entry that was quarantined');
		expect(outcome(7)).toMatchObject({ outcome: 'accepted' });
		expect(outcome(8)).toMatchObject({ outcome: 'quarantined', field: 'identifier[1]' });
		expect(outcome(8)?.reason).toContain('one identifier must name one prescriber');
		expect(result.counts).toEqual({ accepted: 5, duplicate: 0, quarantined: 4 });

		// stored: the first holder of the identifier, the prescriber without a usable e-mail, the patient and both orders
		const kept = await db()
			.select()
			.from(prescribers)
			.where(inArray(prescribers.name, ['Dr Rosamund Kell', 'Dr Thaddeus Brightwell', 'Dr Sidonie Marr', 'Dr Quinlan Ashdown', 'Dr Two Owners']));
		expect(kept.map((p) => [p.name, p.email, p.emailProblem]).sort()).toEqual([
			['Dr Rosamund Kell', 'rosamund.kell@larkspur.test', null],
			['Dr Thaddeus Brightwell', null, "'abc' is not an e-mail address"]
		]);
		expect((await orderBySource('fx-rx-bp-1')).practitionerId).toBeNull();
		expect((await prescriberById((await orderBySource('fx-rx-bp-2')).practitionerId)).name).toBe('Dr Thaddeus Brightwell');
		const held = await db()
			.select()
			.from(quarantine)
			.where(eq(quarantine.messageId, result.messageId as string));
		expect(held.map((q) => [q.entryIndex, q.resourceType, q.field]).sort()).toEqual([
			[0, 'Practitioner', 'telecom'],
			[2, 'Practitioner', 'identifier[0]'],
			[4, 'Practitioner', 'name'],
			[8, 'Practitioner', 'identifier[1]']
		]);
	});

	it('a PractitionerRole whose practitioner is nowhere is quarantined naming the field', async () => {
		const result = await ingestText(
			bundle([
				{
					fullUrl: 'urn:uuid:bad-role',
					resource: { resourceType: 'PractitionerRole', id: 'bad-role', practitioner: { reference: 'Practitioner/nobody-here' } }
				}
			])
		);
		expect(result.entries[0]).toMatchObject({ outcome: 'quarantined', field: 'practitioner' });
		expect(result.entries[0].reason).toContain('Practitioner/nobody-here matches no prescriber on record');
	});
});

describe('CSV order uploads with prescriber columns', () => {
	const header = [
		'mrn',
		'order_id',
		'agent',
		'dose_mg',
		'interval_h',
		'route',
		'start_at',
		'prescriber_name',
		'prescriber_email',
		'given_name',
		'family_name',
		'birth_date',
		'sex'
	];
	const row = (line: number, orderId: string, name: string, address: string) => ({
		line,
		values: Object.fromEntries(
			header.map((h, i) => [
				h,
				['FXCSVPR01', orderId, 'ceftriaxone', '2000', '24', 'iv', '2026-11-29T09:00:00Z', name, address, 'Anouk', 'Vickery', '1957-08-02', 'female'][i]
			])
		)
	});

	it('find or add the prescriber by e-mail (lower case), link the order, and name a malformed address as a row error', async () => {
		const before = await tableCount('prescribers');
		const result = await ingestCsvRows(
			'orders',
			header,
			[
				row(2, 'fx-csv-pr-1', 'Dr Rowena Tillbrook', 'Rowena.Tillbrook@Larkspur.TEST'),
				row(3, 'fx-csv-pr-2', '', 'rowena.tillbrook@larkspur.test'),
				row(4, 'fx-csv-pr-3', '', 'physician3@larkspur.test'),
				row(5, 'fx-csv-pr-4', 'Dr Somebody', 'not-an-address')
			],
			{ source: 'csv', actor: system }
		);
		expect(result.counts).toEqual({ accepted: 3, duplicate: 0, quarantined: 1 });
		expect(result.entries.find((e) => e.index === 5)).toMatchObject({
			outcome: 'quarantined',
			field: 'prescriber_email',
			reason: "prescriber_email 'not-an-address' is not an e-mail address"
		});

		const first = await orderBySource('fx-csv-pr-1');
		const second = await orderBySource('fx-csv-pr-2');
		expect(first.practitionerId).not.toBeNull();
		expect(second.practitionerId).toBe(first.practitionerId);
		expect(await prescriberById(first.practitionerId)).toMatchObject({ name: 'Dr Rowena Tillbrook', email: 'rowena.tillbrook@larkspur.test', userId: null });
		expect(second.prescriberName).toBe('Dr Rowena Tillbrook');

		// an address that is a demo physician's account: the prescriber and the order carry the account
		const caspian = await userByEmail('physician3@larkspur.test');
		const third = await orderBySource('fx-csv-pr-3');
		expect(await prescriberById(third.practitionerId)).toMatchObject({ name: caspian.displayName, userId: caspian.id });
		expect(third).toMatchObject({ prescriberId: caspian.id, prescriberName: caspian.displayName });
		expect(await tableCount('prescribers')).toBe(before + 2);
	});

	it('a prescriber added by e-mail is the same person when a Practitioner with that address arrives', async () => {
		const [before] = await db().select().from(prescribers).where(eq(prescribers.email, 'rowena.tillbrook@larkspur.test'));
		const count = await tableCount('prescribers');
		const result = await ingestText(
			bundle([practitioner('fx-pr-rowena', { staffId: 'LBS-90061', name: ['Rowena', 'Tillbrook'], telecom: email('rowena.tillbrook@larkspur.test') })])
		);
		expect(result.entries[0]).toMatchObject({ outcome: 'accepted', detail: 'updated' });
		expect(await tableCount('prescribers')).toBe(count);
		const ids = await db().select().from(prescriberIdentifiers).where(eq(prescriberIdentifiers.prescriberId, before.id));
		expect(ids.map((i) => i.value).sort()).toEqual(['LBS-90061', 'fx-pr-rowena']);
	});

	it('the directory lists prescribers with their identifiers, specialties and active orders', async () => {
		const page = await directory.list({ search: 'arkwright' });
		expect(page.total).toBe(1);
		expect(page.rows[0]).toMatchObject({ name: 'Dr Hollis Arkwright-Penn', hasAccount: false, specialties: ['Infectious diseases'], activeOrders: 2 });
		expect(page.rows[0].identifiers).toContain(`${STAFF}|LBS-90001`);
	});
});
