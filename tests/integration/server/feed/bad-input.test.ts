// Every file in fixtures/bad-input gets the answer its manifest expects: the HTTP status, the field
// at fault named in the message, the entry in quarantine, and no change to what was stored before.
import { readFileSync } from 'node:fs';
import { and, desc, eq } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { seedUsers } from '../../../../src/lib/server/demo';
import { getDb } from '../../../../src/lib/server/db';
import { feedMessages, quarantine, users } from '../../../../src/lib/server/db/schema';
import { parseCsvText, type CsvKind } from '../../../../src/lib/server/feed';
import { feedTokens } from '../../../../src/lib/server/auth';
import { stopBoss } from '../../../../src/lib/server/queue';
import { POST as feedPost } from '../../../../src/routes/api/v1/feed/+server';
import { POST as uploadChunk } from '../../../../src/routes/feed/upload/chunk/+server';
import { event, ingestFixtureBundle, root, rowHashes, system, tableCount, withAgents } from './helpers';

type Case = {
	file: string;
	via: 'api' | 'csv';
	status: number;
	field: string;
	message: string;
	outcome?: 'quarantined' | 'duplicate' | 'accepted';
	entry?: number;
	quarantined?: number;
	storesNothing?: boolean;
	padToBytes?: number;
	contentType?: string;
	sendTwice?: boolean;
	kind?: CsvKind;
	line?: number;
	warning?: string;
};

const manifest = JSON.parse(readFileSync(new URL('fixtures/bad-input/manifest.json', root), 'utf8')) as { cases: Case[] };
const read = (file: string) => readFileSync(new URL(`fixtures/bad-input/${file}`, root), 'utf8');
let token: { id: string; name: string };
let pharmacist: App.SessionUser;

beforeAll(async () => {
	await withAgents();
	await seedUsers();
	const [u] = await getDb().select().from(users).where(eq(users.email, 'pharmacist@larkspur.test'));
	pharmacist = { id: u.id, email: u.email, displayName: u.displayName, role: u.role };
	const created = await feedTokens.create('bad-input corpus', system);
	token = { id: created.id, name: created.name };
	// what is "stored before": the admission fixture (two patients, their results and orders)
	await ingestFixtureBundle('fixtures/feed/admission-bundle.json');
});
afterAll(stopBoss);

async function postFeed(body: string, contentType = 'application/fhir+json') {
	const request = new Request('http://ebbline.test/api/v1/feed', { method: 'POST', headers: { 'content-type': contentType }, body });
	const response = await feedPost(event(request, { feedToken: token }));
	return { status: response.status, body: await response.json() };
}

async function postCsv(c: Case) {
	const { header, rows } = parseCsvText(read(c.file));
	const request = new Request('http://ebbline.test/feed/upload/chunk', {
		method: 'POST',
		headers: { 'content-type': 'application/json' },
		body: JSON.stringify({ kind: c.kind, mode: 'valid-rows', fileName: c.file, header, rows })
	});
	const response = await uploadChunk(event(request, { user: pharmacist, sessionId: 's' }));
	return { status: response.status, body: await response.json() };
}

function expectUnchanged(before: Record<string, Set<string>>, after: Record<string, Set<string>>, strict: boolean) {
	for (const [table, rows] of Object.entries(before)) {
		const missing = [...rows].filter((h) => !after[table].has(h));
		expect(missing, `${table}: rows stored before were changed or removed`).toEqual([]);
		if (strict) expect(after[table].size, `${table}: rows were added`).toBe(rows.size);
	}
}

describe('fixtures/bad-input', () => {
	it('has at least 40 cases, one file each', () => {
		expect(manifest.cases.length).toBeGreaterThanOrEqual(40);
		expect(new Set(manifest.cases.map((c) => c.file)).size).toBe(manifest.cases.length);
	});

	for (const c of manifest.cases) {
		it(`${c.file}: ${c.status}${c.outcome ? ` ${c.outcome}` : ''}, naming ${c.field}`, async () => {
			let text = c.via === 'api' ? read(c.file) : '';
			if (c.padToBytes) text = text + ' '.repeat(c.padToBytes - Buffer.byteLength(text));
			if (c.sendTwice) expect((await postFeed(text)).status).toBe(202);
			const before = await rowHashes();
			const messagesBefore = await tableCount('feed_messages');
			const { status, body } = c.via === 'api' ? await postFeed(text, c.contentType) : await postCsv(c);
			expect(status).toBe(c.status);
			expectUnchanged(before, await rowHashes(), c.storesNothing !== false || c.sendTwice === true);

			if (status === 400 || status === 413 || status === 415) {
				expect(body.error).toContain(c.message);
				expect(Object.keys(body.issues)).toContain(c.field);
				expect(await tableCount('feed_messages')).toBe(messagesBefore);
				return;
			}
			if (c.via === 'csv') {
				const error = body.errors.find((e: { line: number }) => e.line === c.line);
				expect(error, JSON.stringify(body.errors)).toBeDefined();
				expect(error.column).toBe(c.field);
				expect(error.reason).toContain(c.message);
				if (c.warning) expect(body.warnings.join(' ')).toContain(c.warning);
				const [row] = await getDb()
					.select()
					.from(quarantine)
					.where(and(eq(quarantine.source, 'csv'), eq(quarantine.entryIndex, c.line as number), eq(quarantine.field, c.field)))
					// the row this upload quarantined (earlier cases may have one at the same line and column)
					.orderBy(desc(quarantine.createdAt))
					.limit(1);
				expect(row.reason).toContain(c.message);
				expect(row.raw).toMatchObject({ format: 'csv', kind: c.kind, line: c.line });
				return;
			}
			const entry = body.entries.find((e: { index: number }) => e.index === (c.entry ?? 0));
			expect(entry.outcome).toBe(c.outcome);
			if (c.outcome === 'accepted') {
				// kept, with a note that names the field and says what was wrong with it
				const notes = (entry.notes ?? []).join(' ');
				expect(notes).toContain(c.message);
				expect(notes).toContain(c.field);
				expect(body.counts.quarantined).toBe(c.quarantined ?? 0);
				return;
			}
			expect(entry.reason).toContain(c.message);
			if (c.outcome === 'duplicate') {
				expect(body.duplicateMessage).toBe(true);
				expect(await tableCount('feed_messages')).toBe(messagesBefore);
				return;
			}
			expect(entry.field).toBe(c.field);
			expect(entry.reason).toContain(c.field.split('.')[0].replace(/\[\d+\]$/, ''));
			expect(body.counts.quarantined).toBe(c.quarantined ?? 1);
			const kept = await getDb().select().from(quarantine).where(eq(quarantine.messageId, body.messageId));
			expect(kept.map((q) => q.entryIndex).sort()).toContain(c.entry ?? 0);
			const row = kept.find((q) => q.entryIndex === (c.entry ?? 0));
			expect(row?.field).toBe(c.field);
			expect(row?.reason).toContain(c.message);
			expect(row?.status).toBe('open');
			const [message] = await getDb().select().from(feedMessages).where(eq(feedMessages.id, body.messageId));
			expect(message.raw).toBe(text);
			expect(message.tokenId).toBe(token.id);
		});
	}
});
