// Quarantine: an administrator maps an unknown agent name, corrects a unit, or discards an entry;
// each re-processing goes through the same checks, and every decision is audited.
import { and, eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { seedUsers } from '../../../../src/lib/server/demo';
import { getDb } from '../../../../src/lib/server/db';
import { agents, auditLog, labResults, orders, quarantine, users } from '../../../../src/lib/server/db/schema';
import { parseCsvText, ingestCsvRows, quarantine as q } from '../../../../src/lib/server/feed';
import { stopBoss } from '../../../../src/lib/server/queue';
import { ingestFixtureBundle, ingestText, rowHashes, withAgents } from './helpers';

let admin: { actorId: string; actorLabel: string; requestId: null };

beforeAll(async () => {
	await withAgents();
	await seedUsers();
	const [u] = await getDb().select().from(users).where(eq(users.email, 'admin@larkspur.test'));
	admin = { actorId: u.id, actorLabel: u.email, requestId: null };
	await ingestFixtureBundle('fixtures/feed/admission-bundle.json');
});
afterAll(stopBoss);

const observation = (id: string, value: number, unit: string) => ({
	resourceType: 'Bundle',
	type: 'batch',
	entry: [
		{
			resource: {
				resourceType: 'Observation',
				id,
				status: 'final',
				code: { coding: [{ system: 'http://loinc.org', code: '2160-0' }] },
				subject: { reference: 'Patient/fx-p-1' },
				effectiveDateTime: '2026-11-29T06:00:00Z',
				valueQuantity: { value, unit, code: unit }
			}
		}
	]
});

async function openEntry(messageId: string | null) {
	const [row] = await getDb()
		.select()
		.from(quarantine)
		.where(eq(quarantine.messageId, messageId as string));
	return row;
}

/** The audit rows of an object, as stored (the change audit keeps references, not raw resources or free text). */
const auditRows = async (objectId: string) => getDb().select().from(auditLog).where(eq(auditLog.objectId, objectId));
const auditActions = async (objectId: string) =>
	(await getDb().select({ action: auditLog.action }).from(auditLog).where(eq(auditLog.objectId, objectId))).map((r) => r.action);

describe('quarantine', () => {
	it('lists open entries with reason, field and raw content, and counts them by status', async () => {
		const sent = await ingestText(JSON.stringify(observation('q-unit-1', 1.1, 'umol/L')));
		const { rows, total } = await q.list();
		expect(total).toBe(1);
		expect(rows[0]).toMatchObject({ messageId: sent.messageId, field: 'valueQuantity.code', status: 'open', source: 'fhir' });
		expect(rows[0].raw).toMatchObject({ format: 'fhir', resource: { id: 'q-unit-1' } });
		expect(await q.counts()).toEqual({ open: 1, reprocessed: 0, discarded: 0 });
	});

	it('re-processing unchanged content fails with the same reason and changes nothing', async () => {
		const [row] = (await q.list()).rows;
		const before = await rowHashes();
		const result = await q.reprocess(row.id, admin);
		expect(result).toMatchObject({ ok: false, field: 'valueQuantity.code' });
		expect(await rowHashes()).toEqual(before);
		expect((await q.counts()).open).toBe(1);
	});

	it('accepts the entry once the unit is corrected, and audits the correction', async () => {
		const [row] = (await q.list()).rows;
		const corrected = structuredClone((row.raw as q.FhirRaw).resource) as { valueQuantity: { unit: string; code: string } };
		corrected.valueQuantity.unit = 'mg/dL';
		corrected.valueQuantity.code = 'mg/dL';
		const result = await q.reprocess(row.id, admin, corrected);
		expect(result).toMatchObject({ ok: true, outcome: 'accepted', ordersQueued: 1 });
		const [stored] = await getDb().select().from(labResults).where(eq(labResults.sourceId, 'q-unit-1'));
		expect(stored).toMatchObject({ value: 1.1, unit: 'mg/dL', valueNormalised: 1.1 });
		const [after] = await getDb().select().from(quarantine).where(eq(quarantine.id, row.id));
		expect(after).toMatchObject({ status: 'reprocessed', decidedBy: admin.actorId });
		expect(after.decisionNote).toContain('after correction');
		expect(await auditActions(row.id)).toEqual(['quarantine.reprocessed']);
		const [audit] = await auditRows(row.id);
		expect(audit.before).toEqual({ reason: expect.any(String), rawSha256: expect.stringMatching(/^[0-9a-f]{64}$/) });
		expect(audit.after).toEqual({
			outcome: 'accepted',
			messageId: expect.any(String),
			corrected: true,
			correctedSha256: expect.stringMatching(/^[0-9a-f]{64}$/)
		});
		// neither the entry as received nor as corrected is copied: only their fingerprints
		expect(JSON.stringify([audit.before, audit.after])).not.toContain('resourceType');
		expect((audit.before as { rawSha256: string }).rawSha256).not.toBe((audit.after as { correctedSha256: string }).correctedSha256);
		await expect(q.reprocess(row.id, admin)).rejects.toThrow('already reprocessed');
	});

	it('maps an unknown agent name to a library agent, then accepts the order', async () => {
		const bundle = JSON.parse(JSON.stringify(observation('x', 1, 'mg/dL')));
		bundle.entry[0].resource = {
			resourceType: 'MedicationRequest',
			id: 'q-rx-1',
			status: 'active',
			intent: 'order',
			medicationCodeableConcept: { text: 'Vancocin ward stock' },
			subject: { reference: 'Patient/fx-p-1' },
			authoredOn: '2026-11-29T09:00:00Z',
			dosageInstruction: [
				{ route: { text: 'iv' }, timing: { repeat: { period: 12, periodUnit: 'h' } }, doseAndRate: [{ doseQuantity: { value: 1000, unit: 'mg' } }] }
			]
		};
		const sent = await ingestText(JSON.stringify(bundle));
		const row = await openEntry(sent.messageId);
		expect(row.reason).toContain('unknown agent');
		expect(q.unknownAgentName(row.raw as q.QuarantineRaw)).toBe('Vancocin ward stock');
		const [vanco] = await getDb().select().from(agents).where(eq(agents.code, 'J01XA01'));
		const result = await q.mapAgentAndReprocess(row.id, vanco.id, 'Vancocin ward stock', admin);
		expect(result).toMatchObject({ ok: true, outcome: 'accepted' });
		const [order] = await getDb().select().from(orders).where(eq(orders.sourceId, 'q-rx-1'));
		expect(order.agentId).toBe(vanco.id);
		const [after] = await getDb().select().from(agents).where(eq(agents.id, vanco.id));
		expect(after.synonyms).toContain('Vancocin ward stock');
		expect(await auditActions(vanco.id)).toContain('agent.synonym_added');
		// the next order with that name is recognised straight away
		bundle.entry[0].resource.id = 'q-rx-2';
		const next = await ingestText(JSON.stringify(bundle));
		expect(next.counts.accepted).toBe(1);
	});

	it('refuses to map a name that already names another agent', async () => {
		const bundle = JSON.parse(JSON.stringify(observation('x', 1, 'mg/dL')));
		bundle.entry[0].resource = { ...bundle.entry[0].resource, id: 'q-unknown-loinc', code: { coding: [{ system: 'http://loinc.org', code: '718-7' }] } };
		const sent = await ingestText(JSON.stringify(bundle));
		const row = await openEntry(sent.messageId);
		const [mero] = await getDb().select().from(agents).where(eq(agents.code, 'J01DH02'));
		await expect(q.mapAgentAndReprocess(row.id, mero.id, 'vanco', admin)).rejects.toThrow('already names Vancomycin');
	});

	it('re-processes a corrected CSV row', async () => {
		const { header, rows } = parseCsvText('mrn,test,value,unit,observed_at,result_id\nFX0000001,albumin,2.9,g/L,2026-11-29T06:00:00Z,q-csv-1\n');
		const sent = await ingestCsvRows('results', header, rows, { source: 'csv', actor: admin });
		const row = await openEntry(sent.messageId);
		expect(row).toMatchObject({ field: 'value', entryIndex: 2, source: 'csv' });
		const values = { ...(row.raw as q.CsvRaw).values, unit: 'g/dL' };
		const result = await q.reprocess(row.id, admin, values);
		expect(result).toMatchObject({ ok: true, outcome: 'accepted' });
		const [stored] = await getDb().select().from(labResults).where(eq(labResults.sourceId, 'q-csv-1'));
		expect(stored.valueNormalised).toBe(29);
	});

	it('discards an entry with a reason, audited; the reason is required', async () => {
		const open = await getDb()
			.select()
			.from(quarantine)
			.where(and(eq(quarantine.status, 'open')));
		const row = open[0];
		await expect(q.discard(row.id, ' ', admin)).rejects.toThrow('Say why');
		await q.discard(row.id, 'haemoglobin is not used by Ebbline', admin);
		const [after] = await getDb().select().from(quarantine).where(eq(quarantine.id, row.id));
		expect(after).toMatchObject({ status: 'discarded', decisionNote: 'haemoglobin is not used by Ebbline', decidedBy: admin.actorId });
		expect(await auditActions(row.id)).toEqual(['quarantine.discarded']);
		// the person's reason stays on the entry; the audit records the decision
		const [audit] = await auditRows(row.id);
		expect(audit.after).toEqual({ status: 'discarded' });
		expect(JSON.stringify(audit)).not.toContain('haemoglobin is not used');
		await expect(q.discard(row.id, 'again', admin)).rejects.toThrow('no longer open');
	});
});
