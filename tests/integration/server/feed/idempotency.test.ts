// Re-sending changes nothing: the same message (even re-serialised, even at the same moment), the
// same resources in another message, the same CSV file. A new version of a resource updates it once.
import { eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { labResults } from '../../../../src/lib/server/db/schema';
import { stopBoss } from '../../../../src/lib/server/queue';
import { drainReassess, fixture, ingestFixtureCsv, ingestText, queuedOrderIds, rowHashes, tableCount, withAgents } from './helpers';

const CLINICAL = ['patients', 'encounters', 'orders', 'lab_results', 'body_measurements'];
async function counts() {
	const out: Record<string, number> = {};
	for (const t of [...CLINICAL, 'feed_messages', 'quarantine']) out[t] = await tableCount(t);
	return out;
}

beforeAll(withAgents);
afterAll(stopBoss);

describe('idempotency', () => {
	it('the same bundle three times gives one set of rows', async () => {
		const text = fixture('fixtures/feed/admission-bundle.json');
		const first = await ingestText(text);
		expect(first.counts.accepted).toBe(15);
		await drainReassess();
		const after = await counts();
		const hashes = await rowHashes();
		for (let i = 0; i < 2; i++) {
			const again = await ingestText(text);
			expect(again.duplicateMessage).toBe(true);
			expect(again.messageId).toBe(first.messageId);
			expect(again.counts).toEqual({ accepted: 0, duplicate: 15, quarantined: 0 });
			expect(again.entries.every((e) => e.reason?.includes('duplicate message'))).toBe(true);
		}
		expect(await counts()).toEqual(after);
		expect(await rowHashes()).toEqual(hashes);
		expect(await queuedOrderIds()).toEqual([]);
	});

	it('recognises the same message with other whitespace and key order', async () => {
		const bundle = JSON.parse(fixture('fixtures/feed/admission-bundle.json'));
		const reordered = JSON.stringify({ entry: bundle.entry, type: bundle.type, resourceType: bundle.resourceType });
		const before = await counts();
		const result = await ingestText(reordered);
		expect(result.duplicateMessage).toBe(true);
		expect(await counts()).toEqual(before);
	});

	it('recognises the same resources sent again in another message: stored once, no re-assessment', async () => {
		const bundle = JSON.parse(fixture('fixtures/feed/admission-bundle.json'));
		bundle.type = 'collection';
		const before = await counts();
		const result = await ingestText(JSON.stringify(bundle));
		expect(result.duplicateMessage).toBe(false);
		expect(result.counts).toEqual({ accepted: 0, duplicate: 15, quarantined: 0 });
		const after = await counts();
		expect(after.feed_messages).toBe(before.feed_messages + 1);
		for (const t of CLINICAL) expect(after[t]).toBe(before[t]);
		expect(result.ordersQueued).toBe(0);
		expect(await queuedOrderIds()).toEqual([]);
	});

	it('updates a result sent again as a new version (same id, corrected value) and re-assesses once', async () => {
		const bundle = {
			resourceType: 'Bundle',
			type: 'batch',
			entry: [
				{
					resource: {
						resourceType: 'Observation',
						id: 'fx-o-1-cr-2',
						meta: { versionId: '2' },
						status: 'corrected',
						code: { coding: [{ system: 'http://loinc.org', code: '2160-0' }] },
						subject: { reference: 'Patient/fx-p-1' },
						effectiveDateTime: '2026-11-27T06:10:00Z',
						valueQuantity: { value: 1.7, unit: 'mg/dL', code: 'mg/dL' }
					}
				}
			]
		};
		const before = await tableCount('lab_results');
		const result = await ingestText(JSON.stringify(bundle));
		expect(result.entries[0]).toMatchObject({ outcome: 'accepted', detail: 'updated' });
		expect(await tableCount('lab_results')).toBe(before);
		const [row] = await getDb().select().from(labResults).where(eq(labResults.sourceId, 'fx-o-1-cr-2'));
		expect(row.value).toBe(1.7);
		expect((await queuedOrderIds()).length).toBe(1);
		await drainReassess();
	});

	it('the same bundle sent three times at once is stored once', async () => {
		const bundle = JSON.parse(fixture('fixtures/feed/morning-results-bundle.json'));
		const text = JSON.stringify(bundle);
		const before = await tableCount('lab_results');
		const results = await Promise.all([ingestText(text), ingestText(text), ingestText(text)]);
		expect(results.filter((r) => !r.duplicateMessage)).toHaveLength(1);
		expect(await tableCount('lab_results')).toBe(before + 3);
		await drainReassess();
	});

	it('the same CSV file three times gives one set of rows', async () => {
		const first = await ingestFixtureCsv('results', 'fixtures/feed/lab-results.csv');
		expect(first.counts.accepted).toBe(6);
		const after = await counts();
		for (let i = 0; i < 2; i++) {
			const again = await ingestFixtureCsv('results', 'fixtures/feed/lab-results.csv');
			expect(again.duplicateMessage).toBe(true);
			expect(again.counts.duplicate).toBe(6);
		}
		expect(await counts()).toEqual(after);
	});
});
