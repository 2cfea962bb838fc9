// POST /api/v1/feed through its handler: who may post, size limits, the answer per entry, the audit
// row; plus withdrawing a result sent in error.
import { and, eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { auditLog, labResults } from '../../../../src/lib/server/db/schema';
import { feedTokens } from '../../../../src/lib/server/auth';
import { stopBoss } from '../../../../src/lib/server/queue';
import { MAX_FEED_BYTES } from '../../../../src/lib/server/feed';
import { POST } from '../../../../src/routes/api/v1/feed/+server';
import { drainReassess, event, fixture, queuedOrderIds, system, tableCount, withAgents } from './helpers';

let token: { id: string; name: string; secret: string };

beforeAll(async () => {
	await withAgents();
	token = await feedTokens.create('laboratory system', system);
});
afterAll(stopBoss);

function post(body: string, locals: Partial<App.Locals>, headers: Record<string, string> = {}) {
	const request = new Request('http://ebbline.test/api/v1/feed', { method: 'POST', headers: { 'content-type': 'application/fhir+json', ...headers }, body });
	return POST(event(request, locals));
}

describe('POST /api/v1/feed', () => {
	it('answers 401 without a feed token, even to a signed-in user, and stores nothing', async () => {
		const before = await tableCount('feed_messages');
		const anonymous = await post(fixture('fixtures/feed/admission-bundle.json'), {});
		expect(anonymous.status).toBe(401);
		expect((await anonymous.json()).error).toContain('Bearer');
		const browser = await post(fixture('fixtures/feed/admission-bundle.json'), {
			user: { id: '00000000-0000-4000-8000-000000000001', email: 'admin@larkspur.test', displayName: 'Admin', role: 'admin' },
			sessionId: 'session'
		});
		expect(browser.status).toBe(401);
		expect(await tableCount('feed_messages')).toBe(before);
	});

	it('no longer recognises a revoked token', async () => {
		const other = await feedTokens.create('retired interface', system);
		expect(await feedTokens.verify(other.secret)).toMatchObject({ id: other.id });
		await feedTokens.revoke(other.id, system);
		expect(await feedTokens.verify(other.secret)).toBeNull();
	});

	it('refuses a token after its expiry, saying when it expired, and keeps the expiry in the audit row', async () => {
		const created = new Date('2026-12-01T08:00:00Z');
		const interim = await feedTokens.create('interim interface', system, { expiresInDays: 30, now: created });
		expect(interim.expiresAt?.toISOString()).toBe('2026-12-31T08:00:00.000Z');
		const justBefore = new Date('2026-12-31T07:59:59Z');
		expect(await feedTokens.check(interim.secret, justBefore)).toEqual({ state: 'valid', token: { id: interim.id, name: 'interim interface' } });
		const atExpiry = new Date('2026-12-31T08:00:00Z');
		expect(await feedTokens.check(interim.secret, atExpiry)).toEqual({ state: 'expired', expiredAt: interim.expiresAt });
		expect(await feedTokens.verify(interim.secret, atExpiry)).toBeNull();
		expect(await feedTokens.check('ebf_not-a-token')).toEqual({ state: 'unknown' });
		const [row] = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.action, 'feed_token.created'), eq(auditLog.objectId, interim.id)));
		expect(row.after).toEqual({ name: 'interim interface', expiresAt: '2026-12-31T08:00:00.000Z' });
		// a token without expiry stays valid
		expect((await feedTokens.check(token.secret, new Date('2036-01-01T00:00:00Z'))).state).toBe('valid');
	});

	it('answers 413 when the declared length is over 2 MB, before reading the body', async () => {
		const response = await post('{}', { feedToken: token }, { 'content-length': String(MAX_FEED_BYTES + 1) });
		expect(response.status).toBe(413);
		expect((await response.json()).error).toContain('exceeds the feed limit of 2 MB');
	});

	it('answers 202 with an outcome per entry, and writes one audit row naming the token', async () => {
		const bundle = JSON.parse(fixture('fixtures/feed/admission-bundle.json'));
		bundle.entry.push({ resource: { resourceType: 'AllergyIntolerance', id: 'c-1' } });
		const response = await post(JSON.stringify(bundle), { feedToken: token, requestId: 'req-feed-1' });
		expect(response.status).toBe(202);
		const body = await response.json();
		expect(body.counts).toEqual({ accepted: 15, duplicate: 0, quarantined: 1 });
		expect(body.entries).toHaveLength(16);
		expect(body.entries[0]).toEqual({ index: 0, resourceType: 'Patient', id: 'fx-p-1', outcome: 'accepted', detail: 'created' });
		expect(body.entries[15]).toMatchObject({ index: 15, resourceType: 'AllergyIntolerance', outcome: 'quarantined', field: 'resourceType' });
		expect(body.ordersQueued).toBe(2);
		const audit = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.action, 'feed.message_received'), eq(auditLog.objectId, body.messageId)));
		expect(audit).toHaveLength(1);
		expect(audit[0]).toMatchObject({ actorLabel: 'feed token laboratory system', requestId: 'req-feed-1' });
		await drainReassess();
	});

	it('withdraws a result sent in error and re-assesses the patient’s orders', async () => {
		const bundle = {
			resourceType: 'Bundle',
			type: 'batch',
			entry: [
				{
					resource: {
						resourceType: 'Observation',
						id: 'fx-o-1-cr-2',
						status: 'entered-in-error',
						code: { coding: [{ system: 'http://loinc.org', code: '2160-0' }] },
						subject: { reference: 'Patient/fx-p-1' }
					}
				}
			]
		};
		const response = await post(JSON.stringify(bundle), { feedToken: token });
		const body = await response.json();
		expect(body.entries[0]).toMatchObject({ outcome: 'accepted', detail: 'retracted' });
		expect(await getDb().select().from(labResults).where(eq(labResults.sourceId, 'fx-o-1-cr-2'))).toEqual([]);
		expect((await queuedOrderIds()).length).toBe(1);
	});
});
