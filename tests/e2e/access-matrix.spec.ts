// Every route in src/routes against every kind of caller. The table below is written by hand and is
// the expected behaviour; a route without a row fails the first test, so new routes must be declared.
import { expect, request as playwrightRequest, test, type APIRequestContext } from '@playwright/test';
import { sql } from 'drizzle-orm';
import { existsSync, readdirSync, readFileSync, statSync } from 'node:fs';
import path from 'node:path';
import { feedTokens } from '../../src/lib/server/auth';
import { closeDb, getDb } from '../../src/lib/server/db';
import { DEMO, DEMO_PASSWORD } from './helpers';

type Caller = 'anonymous' | 'pharmacist' | 'physician' | 'admin' | 'feed';
type Who = 'public' | 'feed' | readonly ('pharmacist' | 'physician' | 'admin')[];
// api: answers 401 to anonymous callers; otherwise (pages and downloads a person clicks) a GET
// sends them to sign in.
type Row = { path: string; method?: 'GET' | 'POST'; who: Who; api?: boolean };

const ANY = ['pharmacist', 'physician', 'admin'] as const;
const STEWARDS = ['pharmacist', 'admin'] as const;
const ADMIN = ['admin'] as const;
const UUID = '00000000-0000-4000-8000-000000000000';

const EXPECTED: Record<string, Row> = {
	'/': { path: '/', who: ANY },
	'/sign-in': { path: '/sign-in', who: 'public' },
	'/sign-in/second-factor': { path: '/sign-in/second-factor', who: 'public' },
	'/account/security': { path: '/account/security', who: ANY },
	'/sign-out': { path: '/sign-out', who: 'public' },
	'/health': { path: '/health', who: 'public', api: true },
	'/admin/users': { path: '/admin/users', who: ADMIN },
	'/admin/rules': { path: '/admin/rules', who: ADMIN },
	'/admin/agents': { path: '/admin/agents', who: ADMIN },
	'/admin/quarantine': { path: '/admin/quarantine', who: ADMIN },
	'/admin/feed-tokens': { path: '/admin/feed-tokens', who: ADMIN },
	'/admin/audit': { path: '/admin/audit', who: ADMIN },
	'/admin/audit/export': { path: '/admin/audit/export', who: ADMIN },
	'/admin/access': { path: '/admin/access', who: ADMIN },
	'/admin/access/export': { path: '/admin/access/export', who: ADMIN },
	'/admin/mail': { path: '/admin/mail', who: ADMIN },
	'/api/v1/recommendations/[id]/withdraw': { path: `/api/v1/recommendations/${UUID}/withdraw`, method: 'POST', who: STEWARDS, api: true },
	'/admin/settings': { path: '/admin/settings', who: ADMIN },
	'/dev/mail': { path: '/dev/mail', who: ADMIN },
	'/api/v1/admin/rules/backtest': { path: '/api/v1/admin/rules/backtest', method: 'POST', who: ADMIN, api: true },
	'/api/v1/admin/rules/replays/[id]': { path: `/api/v1/admin/rules/replays/${UUID}`, who: ADMIN, api: true },
	'/api/v1/feed': { path: '/api/v1/feed', method: 'POST', who: 'feed', api: true },
	'/feed/upload': { path: '/feed/upload', who: STEWARDS },
	'/feed/upload/chunk': { path: '/feed/upload/chunk', method: 'POST', who: STEWARDS, api: true },
	'/feed/upload/template/[kind]': { path: '/feed/upload/template/results', who: STEWARDS },
	'/board': { path: '/board', who: STEWARDS },
	'/flags/[id]': { path: `/flags/${UUID}`, who: STEWARDS },
	'/flags/[id]/recommend': { path: `/flags/${UUID}/recommend`, who: STEWARDS },
	'/patients/[id]': { path: `/patients/${UUID}`, who: ANY },
	'/api/v1/flags': { path: '/api/v1/flags', who: STEWARDS, api: true },
	'/api/v1/flags/[id]': { path: `/api/v1/flags/${UUID}`, who: STEWARDS, api: true },
	'/api/v1/flags/[id]/events': { path: `/api/v1/flags/${UUID}/events`, method: 'POST', who: STEWARDS, api: true },
	'/api/v1/patients/[id]': { path: `/api/v1/patients/${UUID}`, who: ANY, api: true },
	'/api/v1/patients/[id]/projection': { path: `/api/v1/patients/${UUID}/projection`, who: ANY, api: true },
	'/reports': { path: '/reports', who: STEWARDS },
	'/reports/export/[table]': { path: '/reports/export/recommendations', who: STEWARDS },
	'/recommendations': { path: '/recommendations', who: ['physician', 'admin'] },
	'/notifications': { path: '/notifications', who: ANY },
	'/respond/[token]': { path: '/respond/not-a-real-token', who: 'public' },
	'/account/setup/[token]': { path: '/account/setup/not-a-real-token', who: 'public' }
};

/**
 * Every form action, by route id and action name ('default' for an unnamed one), with who may post it.
 * A role the route lets in may still be refused by the action itself (a physician reads a patient but
 * does not record dialysis). `fresh`: the action ends the caller's session, so it runs on its own.
 */
type ActionRow = { who: Who; fresh?: boolean };
const EXPECTED_ACTIONS: Record<string, ActionRow> = {
	'/admin/users?/create': { who: ADMIN },
	'/admin/users?/update': { who: ADMIN },
	'/admin/users?/resetPassword': { who: ADMIN },
	'/admin/users?/resetSecondFactor': { who: ADMIN },
	'/admin/agents?/save': { who: ADMIN },
	'/admin/mail?/resend': { who: ADMIN },
	'/admin/mail?/phone': { who: ADMIN },
	'/admin/feed-tokens?/create': { who: ADMIN },
	'/admin/feed-tokens?/revoke': { who: ADMIN },
	'/admin/settings?/save': { who: ADMIN },
	'/admin/rules?/save': { who: ADMIN },
	'/admin/rules?/publish': { who: ADMIN },
	'/admin/rules?/rollBack': { who: ADMIN },
	'/admin/quarantine?/reprocess': { who: ADMIN },
	'/admin/quarantine?/mapAgent': { who: ADMIN },
	'/admin/quarantine?/discard': { who: ADMIN },
	'/patients/[id]?/renalReplacementSet': { who: STEWARDS },
	'/patients/[id]?/renalReplacementClear': { who: STEWARDS },
	'/patients/[id]?/orderRestart': { who: STEWARDS },
	'/account/setup/[token]?/default': { who: 'public' },
	'/notifications?/read': { who: ANY },
	'/sign-in?/default': { who: 'public' },
	'/sign-in/second-factor?/default': { who: 'public' },
	'/account/security?/start': { who: ANY },
	'/account/security?/confirm': { who: ANY },
	'/account/security?/regenerate': { who: ANY },
	'/account/security?/disable': { who: ANY },
	'/sign-out?/default': { who: 'public', fresh: true },
	'/flags/[id]?/withdraw': { who: STEWARDS },
	'/flags/[id]/recommend?/send': { who: STEWARDS },
	'/respond/[token]?/accept': { who: 'public' },
	'/respond/[token]?/modify': { who: 'public' },
	'/respond/[token]?/decline': { who: 'public' },
	'/respond/[token]?/setup': { who: 'public' },
	'/respond/[token]?/code': { who: 'public' },
	'/respond/[token]?/confirm': { who: 'public' },
	'/recommendations?/accept': { who: ['physician'] },
	'/recommendations?/modify': { who: ['physician'] },
	'/recommendations?/decline': { who: ['physician'] }
};

/** The action names of a +page.server.ts, read from its `export const actions = { … }` object. */
function actionNames(file: string): string[] {
	const text = readFileSync(file, 'utf8');
	const start = text.indexOf('export const actions');
	if (start < 0) return [];
	const body = text.slice(start, text.indexOf('\n};', start));
	return [...body.matchAll(/^\t([A-Za-z_$][\w$]*)\s*(?::|\(|,|$)/gm)].map((m) => m[1]);
}

/** `<route id>?/<action>` for every form action in src/routes. */
function actionIds(): string[] {
	return routeIds().flatMap((id) => {
		const file = path.join('src/routes', id === '/' ? '' : id, '+page.server.ts');
		return existsSync(file) ? actionNames(file).map((name) => `${id}?/${name}`) : [];
	});
}

/** Route ids from the files in src/routes, as SvelteKit names them. */
function routeIds(dir = 'src/routes', base = ''): string[] {
	const ids: string[] = [];
	const entries = readdirSync(dir);
	if (entries.some((f) => ['+page.svelte', '+page.server.ts', '+server.ts'].includes(f))) ids.push(base || '/');
	for (const entry of entries) {
		const full = path.join(dir, entry);
		if (statSync(full).isDirectory()) {
			const segment = /^\(.+\)$/.test(entry) ? '' : `/${entry}`;
			ids.push(...routeIds(full, base + segment));
		}
	}
	return ids;
}

test('every route in src/routes has a row in the expected-access table', () => {
	const missing = routeIds().filter((id) => !(id in EXPECTED));
	expect(missing, 'add these routes to EXPECTED in tests/e2e/access-matrix.spec.ts').toEqual([]);
	const stale = Object.keys(EXPECTED).filter((id) => !routeIds().includes(id));
	expect(stale, 'these rows name routes that no longer exist').toEqual([]);
});

test('every form action in src/routes has a row in the expected-action table', () => {
	const found = actionIds();
	// the reader finds the actions it should (guards against a reader that finds nothing)
	expect(found).toEqual(expect.arrayContaining(['/admin/users?/create', '/sign-in?/default', '/respond/[token]?/accept']));
	expect(
		found.filter((id) => !(id in EXPECTED_ACTIONS)),
		'add these actions to EXPECTED_ACTIONS in tests/e2e/access-matrix.spec.ts'
	).toEqual([]);
	expect(
		Object.keys(EXPECTED_ACTIONS).filter((id) => !found.includes(id)),
		'these rows name actions that no longer exist'
	).toEqual([]);
});

test.describe('access matrix', () => {
	const callers: Partial<Record<Caller, APIRequestContext>> = {};
	let feedSecret = '';
	const baseURL = process.env.EBBLINE_BASE_URL ?? 'http://127.0.0.1:3000';

	test.beforeAll(async () => {
		callers.anonymous = await playwrightRequest.newContext({ baseURL });
		for (const role of ['pharmacist', 'physician', 'admin'] as const) {
			const context = await playwrightRequest.newContext({ baseURL });
			const response = await context.post('/sign-in', {
				form: { email: DEMO[role], password: DEMO_PASSWORD, next: '/' },
				headers: { origin: baseURL, accept: 'text/html' },
				maxRedirects: 0
			});
			expect(response.status()).toBe(303);
			callers[role] = context;
		}
		const token = await feedTokens.create(`access matrix ${Date.now()}`, { actorId: null, actorLabel: 'access-matrix test', requestId: null });
		feedSecret = token.secret;
		callers.feed = await playwrightRequest.newContext({ baseURL, extraHTTPHeaders: { authorization: `Bearer ${feedSecret}` } });
	});

	test.afterAll(async () => {
		for (const context of Object.values(callers)) await context?.dispose();
		await closeDb();
	});

	function allowed(who: Who, caller: Caller) {
		if (who === 'public') return true;
		if (who === 'feed') return caller === 'feed';
		return caller !== 'anonymous' && caller !== 'feed' && (who as readonly string[]).includes(caller);
	}

	for (const [id, row] of Object.entries(EXPECTED)) {
		test(`${row.method ?? 'GET'} ${id}`, async () => {
			const results: string[] = [];
			for (const caller of ['anonymous', 'pharmacist', 'physician', 'admin', 'feed'] as Caller[]) {
				const context = callers[caller]!;
				const options = { maxRedirects: 0, headers: { origin: baseURL, accept: row.api ? 'application/json' : 'text/html' } };
				const response = row.method === 'POST' ? await context.post(row.path, { ...options, data: {} }) : await context.get(row.path, options);
				const status = response.status();
				const location = response.headers()['location'] ?? '';
				const toSignIn = status === 303 && location.includes('/sign-in');
				const signedIn = caller !== 'anonymous' && caller !== 'feed';
				let verdict: string;
				if (allowed(row.who, caller)) {
					verdict = status === 401 || status === 403 || toSignIn || status >= 500 ? `FAIL ${status}` : 'ok';
				} else if (!signedIn && !(row.who === 'feed' && caller === 'feed')) {
					// anonymous (and a feed token outside the feed): sign in first
					verdict = (row.api ? status === 401 : toSignIn) ? 'ok' : `FAIL ${status} ${location}`;
				} else {
					verdict = status === 403 ? 'ok' : `FAIL ${status} ${location}`;
				}
				results.push(`${caller}: ${verdict}`);
			}
			expect(
				results.filter((r) => r.includes('FAIL')),
				results.join(', ')
			).toEqual([]);
		});
	}

	async function signedInContext(email: string) {
		const context = await playwrightRequest.newContext({ baseURL });
		const response = await context.post('/sign-in', {
			form: { email, password: DEMO_PASSWORD, next: '/' },
			headers: { origin: baseURL, accept: 'text/html' },
			maxRedirects: 0
		});
		expect(response.status(), `sign-in of ${email}`).toBe(303);
		return context;
	}

	for (const [id, row] of Object.entries(EXPECTED_ACTIONS)) {
		test(`POST ${id}`, async () => {
			const [routeId, name] = id.split('?/');
			const url = name === 'default' ? EXPECTED[routeId].path : `${EXPECTED[routeId].path}?/${name}`;
			const results: string[] = [];
			for (const caller of ['anonymous', 'pharmacist', 'physician', 'admin', 'feed'] as Caller[]) {
				const own = row.fresh && caller !== 'anonymous' && caller !== 'feed' ? await signedInContext(DEMO[caller]) : null;
				const context = own ?? callers[caller]!;
				// an empty form, as a browser without script posts it: what passes the guard is refused later for its content
				const response = await context.post(url, { form: {}, maxRedirects: 0, headers: { origin: baseURL, accept: 'text/html' } });
				await own?.dispose();
				const status = response.status();
				const toSignIn = status === 303 && (response.headers()['location'] ?? '').includes('/sign-in');
				const signedIn = caller !== 'anonymous' && caller !== 'feed';
				let verdict: string;
				// a public action may itself lead to the sign-in page (signing out does); for the others that is a refusal
				const refusedToSignIn = toSignIn && row.who !== 'public';
				if (allowed(row.who, caller)) verdict = status === 401 || status === 403 || refusedToSignIn || status >= 500 ? `FAIL ${status}` : 'ok';
				else if (!signedIn) verdict = status === 401 || toSignIn ? 'ok' : `FAIL ${status}`;
				else verdict = status === 403 ? 'ok' : `FAIL ${status}`;
				results.push(`${caller}: ${verdict}`);
			}
			expect(
				results.filter((r) => r.includes('FAIL')),
				results.join(', ')
			).toEqual([]);
		});
	}

	test("a physician cannot read another physician's patient or answer another physician's recommendation", async () => {
		const db = getDb();
		const idOf = async (email: string) => Array.from(await db.execute<{ id: string }>(sql`select id from users where email = ${email}`))[0].id;
		const mine = await idOf(DEMO.physician);
		const other = await idOf(DEMO.physician2);
		// a patient the first physician prescribed for, with nothing tying them to the second
		const seenBy = (user: string) => sql`(
			exists (select 1 from orders o left join prescribers pr on pr.id = o.practitioner_id
				where o.patient_id = p.id and (o.prescriber_id = ${user}::uuid or pr.user_id = ${user}::uuid))
			or exists (select 1 from recommendations r join flags f on f.id = r.flag_id where f.patient_id = p.id and r.physician_id = ${user}::uuid))`;
		const [patient] = Array.from(
			await db.execute<{ id: string }>(sql`select p.id from patients p where ${seenBy(mine)} and not ${seenBy(other)} order by p.mrn limit 1`)
		);
		expect(patient, 'the demo has a patient of the first physician only').toBeTruthy();
		const physician2 = await signedInContext(DEMO.physician2);
		try {
			const json = { maxRedirects: 0, headers: { origin: baseURL, accept: 'application/json' } };
			const html = { maxRedirects: 0, headers: { origin: baseURL, accept: 'text/html' } };
			expect((await callers.physician!.get(`/patients/${patient.id}`, html)).status()).toBe(200);
			expect((await physician2.get(`/patients/${patient.id}`, html)).status()).toBe(404);
			expect((await physician2.get(`/api/v1/patients/${patient.id}`, json)).status()).toBe(404);
			const [order] = Array.from(await db.execute<{ id: string }>(sql`select id from orders where patient_id = ${patient.id}::uuid limit 1`));
			const projection = `/api/v1/patients/${patient.id}/projection?order=${order.id}`;
			expect((await callers.physician!.get(projection, json)).status()).toBe(200);
			expect((await physician2.get(projection, json)).status()).toBe(404);

			const [rec] = Array.from(
				await db.execute<{ id: string; status: string }>(
					sql`select id, status from recommendations where physician_id = ${mine}::uuid and lower(coalesce(recipient_email, '')) <> ${DEMO.physician2} order by created_at desc limit 1`
				)
			);
			expect(rec, 'the demo has a recommendation sent to the first physician').toBeTruthy();
			const answered = await physician2.post('/recommendations?/accept', { form: { id: rec.id }, ...html });
			expect(answered.status()).toBe(409);
			expect(await answered.text()).toContain('Only the physician it was sent to can answer this recommendation.');
			const [after] = Array.from(await db.execute<{ status: string }>(sql`select status from recommendations where id = ${rec.id}::uuid`));
			expect(after.status).toBe(rec.status);
		} finally {
			await physician2.dispose();
		}
	});

	test('a refusal by role and a read of a patient reach the access log, named by route and request', async () => {
		const db = getDb();
		const rowsOf = async (requestId: string) =>
			Array.from(
				await db.execute<{ kind: string; route: string; status: number; actor_label: string; role: string | null; patient_id: string | null }>(
					sql`select kind, route, status, actor_label, role, patient_id from access_log where request_id = ${requestId}`
				)
			);
		const options = { maxRedirects: 0, headers: { origin: baseURL, accept: 'text/html' } };

		const refused = await callers.physician!.get('/board', options);
		expect(refused.status()).toBe(403);
		const refusedId = refused.headers()['x-request-id'];
		// the guard writes refusals without holding up the answer: wait for the row
		await expect
			.poll(() => rowsOf(refusedId), { timeout: 5_000 })
			.toEqual([{ kind: 'denied', route: '/board', status: 403, actor_label: DEMO.physician, role: 'physician', patient_id: null }]);

		// refused by the route table itself (an API outside the caller's role) is on record as well
		const apiRefused = await callers.physician!.get('/api/v1/flags', { ...options, headers: { ...options.headers, accept: 'application/json' } });
		expect(apiRefused.status()).toBe(403);
		await expect
			.poll(() => rowsOf(apiRefused.headers()['x-request-id']), { timeout: 5_000 })
			.toEqual([{ kind: 'denied', route: '/api/v1/flags', status: 403, actor_label: DEMO.physician, role: 'physician', patient_id: null }]);

		const [patient] = Array.from(await db.execute<{ id: string }>(sql`select id from patients order by mrn limit 1`));
		const read = await callers.pharmacist!.get(`/api/v1/patients/${patient.id}`, { ...options, headers: { ...options.headers, accept: 'application/json' } });
		expect(read.status()).toBe(200);
		expect(await rowsOf(read.headers()['x-request-id'])).toEqual([
			{ kind: 'patient_api', route: '/api/v1/patients/[id]', status: 200, actor_label: DEMO.pharmacist, role: 'pharmacist', patient_id: patient.id }
		]);
	});
});
