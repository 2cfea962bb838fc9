// fixtures/bad-input/requests.json against the running app, through its hooks: bad query strings,
// form fields and JSON bodies each get a 4xx naming the parameter or field, and nothing is stored.
// (The feed and CSV files of the same corpus run in tests/integration/server/feed/bad-input.test.ts.)
import { readFileSync } from 'node:fs';
import { expect, request as playwrightRequest, test, type APIRequestContext } from '@playwright/test';
import { parse } from 'devalue';
import { sql } from 'drizzle-orm';
import { createDatabase, type Database } from '../../src/lib/server/db';
import { DEMO, DEMO_PASSWORD } from './helpers';

type Role = 'pharmacist' | 'physician' | 'admin';
type Case = {
	name: string;
	via: 'query' | 'form' | 'json' | 'action';
	role: Role | null;
	path: string;
	form?: Record<string, string>;
	body?: string;
	/** for 'action': the raw body's content-type (null: none) */
	contentType?: string | null;
	status: number;
	field: string;
	message: string;
	notStored?: string;
};

const baseURL = process.env.EBBLINE_BASE_URL ?? 'http://127.0.0.1:3000';
const corpus = JSON.parse(readFileSync(new URL('../../fixtures/bad-input/requests.json', import.meta.url), 'utf8')) as { cases: Case[] };
const contexts = new Map<Role | null, APIRequestContext>();
let db: Database;
let flag: { id: string; version: number };

function expand(text: string) {
	return text
		.replaceAll('{{nul}}', '\u0000')
		.replaceAll('{{zwsp}}', '\u200b')
		.replaceAll('{{flag}}', flag.id)
		.replace(/\{\{repeat:(\d+):(.)\}\}/g, (_m, n: string, c: string) => c.repeat(Number(n)))
		.replace(/\{\{deep:(\d+)\}\}/g, (_m, n: string) => '['.repeat(Number(n)) + ']'.repeat(Number(n)));
}

async function contextFor(role: Role | null) {
	let context = contexts.get(role);
	if (!context) {
		context = await playwrightRequest.newContext({ baseURL, extraHTTPHeaders: { origin: baseURL } });
		if (role) {
			const signedIn = await context.post('/sign-in', {
				form: { email: DEMO[role], password: DEMO_PASSWORD, next: '/' },
				headers: { accept: 'text/html' },
				maxRedirects: 0
			});
			expect(signedIn.status(), `${role} signs in`).toBe(303);
		}
		contexts.set(role, context);
	}
	return context;
}

const flagVersion = async (id: string) =>
	Array.from((await db.execute(sql`select version from flags where id = ${id}`)) as unknown as { version: number }[])[0].version;

test.beforeAll(async () => {
	const url = process.env.DATABASE_URL;
	if (!url) throw new Error('DATABASE_URL is not set: run the end-to-end tests with `npm test`.');
	db = createDatabase(url, { max: 2 });
	const [row] = Array.from((await db.execute(sql`select id from flags where state <> 'closed' order by priority desc limit 1`)) as unknown as { id: string }[]);
	flag = { id: row.id, version: await flagVersion(row.id) };
});
test.afterAll(async () => {
	for (const context of contexts.values()) await context.dispose();
	await db?.$client.end({ timeout: 5 });
});

test('the request corpus has at least 25 cases across query strings, forms and JSON bodies', () => {
	expect(corpus.cases.length).toBeGreaterThanOrEqual(25);
	for (const via of ['query', 'form', 'json', 'action']) expect(corpus.cases.filter((c) => c.via === via).length, via).toBeGreaterThanOrEqual(3);
});

for (const c of corpus.cases) {
	test(`${c.via}: ${c.name}`, async () => {
		const context = await contextFor(c.role);
		const path = expand(c.path);
		if (c.via === 'action') {
			// a malformed form action post, plain and enhanced: a 4xx naming the action or the content-type, never a 500
			const headers: Record<string, string> = c.contentType ? { 'content-type': c.contentType } : {};
			const plain = await context.post(path, { data: Buffer.from(c.body ?? '', 'utf8'), headers: { ...headers, accept: 'text/html' }, maxRedirects: 0 });
			const text = await plain.text();
			expect(plain.status(), text.slice(0, 300)).toBe(c.status);
			expect(text, 'the action or content-type at fault is named').toContain(c.field);
			expect(text).toContain(c.message);
			const enhanced = await context.post(path, {
				data: Buffer.from(c.body ?? '', 'utf8'),
				headers: { ...headers, accept: 'application/json', 'x-sveltekit-action': 'true' },
				maxRedirects: 0
			});
			const answer = (await enhanced.json()) as { type: string; error?: { message: string } };
			expect(enhanced.status()).toBe(c.status);
			expect(answer.type).toBe('error');
			expect(answer.error?.message).toContain(c.field);
		} else if (c.via === 'form') {
			const form = Object.fromEntries(Object.entries(c.form ?? {}).map(([k, v]) => [k, expand(v)]));
			const response = await context.post(path, { form, headers: { 'x-sveltekit-action': 'true', accept: 'application/json' } });
			const answer = (await response.json()) as { type: string; status: number; data: string };
			expect(answer.type, JSON.stringify(answer).slice(0, 300)).toBe('failure');
			expect(answer.status).toBe(c.status);
			const data = parse(answer.data) as { errors: Record<string, string> };
			expect(Object.keys(data.errors), 'the field at fault is named').toContain(c.field);
			expect(data.errors[c.field]).toContain(c.message);
		} else {
			const response =
				c.via === 'query'
					? await context.get(path, { headers: { accept: 'application/json' } })
					: await context.post(path, {
							data: Buffer.from(expand(c.body ?? ''), 'utf8'),
							headers: { 'content-type': 'application/json', accept: 'application/json' }
						});
			const text = await response.text();
			expect(response.status(), text.slice(0, 300)).toBe(c.status);
			expect(text, 'the parameter or field at fault is named').toContain(c.field);
			expect(text).toContain(c.message);
			expect(text, 'no stack trace').not.toMatch(/\n\s+at /);
		}
		if (c.notStored) {
			const found = Array.from((await db.execute(sql`select count(*)::int as n from users where email = ${c.notStored}`)) as unknown as { n: number }[]);
			expect(found[0].n, `${c.notStored} was not stored`).toBe(0);
		}
	});
}

test('the flag the bad JSON bodies were sent to is unchanged', async () => {
	expect(await flagVersion(flag.id)).toBe(flag.version);
});
