import { expect, request as playwrightRequest, test } from '@playwright/test';
import { DEMO, DEMO_PASSWORD, signIn } from './helpers';

const baseURL = process.env.EBBLINE_BASE_URL ?? 'http://127.0.0.1:3000';

async function signInRaw(context: Awaited<ReturnType<typeof playwrightRequest.newContext>>, email: string) {
	return context.post('/sign-in', {
		form: { email, password: DEMO_PASSWORD, next: '/' },
		headers: { origin: baseURL, accept: 'text/html' },
		maxRedirects: 0
	});
}

function sessionCookie(setCookie: string | undefined) {
	const match = /ebbline_session=([^;]*)/.exec(setCookie ?? '');
	return match?.[1] ?? null;
}

test('pages carry a content security policy and the hygiene headers', async ({ request }) => {
	const response = await request.get('/sign-in');
	const headers = response.headers();
	expect(headers['content-security-policy']).toContain("frame-ancestors 'none'");
	expect(headers['content-security-policy']).toContain("default-src 'self'");
	expect(headers['content-security-policy']).toContain("object-src 'none'");
	expect(headers['x-content-type-options']).toBe('nosniff');
	expect(headers['referrer-policy']).toBe('same-origin');
	expect(headers['x-frame-options']).toBe('DENY');
	expect(headers['x-request-id']).toMatch(/^[0-9a-f-]{36}$/);
});

test("the header's Sign out, a form posted without script, ends the session", async ({ page }) => {
	await signIn(page, DEMO.pharmacist);
	await page.getByRole('button', { name: 'Sign out' }).click();
	await expect(page).toHaveURL(/\/sign-in/);
	await expect(page.getByText('Cross-site POST form submissions are forbidden')).toHaveCount(0);
	const board = await page.goto('/board');
	expect(board?.url()).toMatch(/\/sign-in\?next=%2Fboard/);
});

test('the session cookie is httpOnly, SameSite=Lax, site-wide, and Secure only over HTTPS', async () => {
	const context = await playwrightRequest.newContext({ baseURL });
	const response = await signInRaw(context, DEMO.pharmacist);
	expect(response.status()).toBe(303);
	const setCookie = response.headers()['set-cookie'];
	expect(setCookie).toMatch(/ebbline_session=/);
	expect(setCookie).toMatch(/HttpOnly/i);
	expect(setCookie).toMatch(/SameSite=Lax/i);
	expect(setCookie).toMatch(/Path=\//i);
	// served over plain http on loopback here; behind HTTPS the same code sets Secure
	expect(setCookie).not.toMatch(/;\s*Secure/i);
	await context.dispose();
});

test('signing in always issues a new session id (no session fixation)', async () => {
	const context = await playwrightRequest.newContext({
		baseURL,
		storageState: {
			cookies: [
				{
					name: 'ebbline_session',
					value: 'planted-by-an-attacker',
					domain: '127.0.0.1',
					path: '/',
					expires: -1,
					httpOnly: true,
					secure: false,
					sameSite: 'Lax'
				}
			],
			origins: []
		}
	});
	const first = sessionCookie((await signInRaw(context, DEMO.pharmacist)).headers()['set-cookie']);
	expect(first).toBeTruthy();
	expect(first).not.toBe('planted-by-an-attacker');
	const second = sessionCookie((await signInRaw(context, DEMO.pharmacist)).headers()['set-cookie']);
	expect(second).toBeTruthy();
	expect(second).not.toBe(first);
	await context.dispose();
});

test('form actions refuse a cross-site origin (CSRF)', async () => {
	const context = await playwrightRequest.newContext({ baseURL });
	const response = await context.post('/sign-in', {
		form: { email: DEMO.admin, password: DEMO_PASSWORD },
		headers: { origin: 'http://evil.example', accept: 'text/html' },
		maxRedirects: 0
	});
	expect(response.status()).toBe(403);
	expect(response.headers()['set-cookie'] ?? '').not.toMatch(/ebbline_session=[^;]+/);
	await context.dispose();
});

test('errors reach the client without stack traces', async () => {
	const context = await playwrightRequest.newContext({ baseURL });
	await signInRaw(context, DEMO.pharmacist);
	const response = await context.get('/api/v1/flags?limit=not-a-number&severity=%00%27;drop%20table%20flags;--');
	expect(response.status()).toBe(400);
	const body = await response.text();
	expect(body).not.toMatch(/\bat .+\.(ts|js):\d+/);
	expect(body).not.toMatch(/node_modules/);
	await context.dispose();
});

// each of these resolves, in some browser or after one more decoding step, to another site
const OFF_SITE = ['/%09/evil.example', '//evil.example', '/\\evil.example', 'https://evil.example', '/\t/evil.example', '%2F%2Fevil.example'];

test('after sign-in, next never leads off the site: page load, form action and enhanced submit', async () => {
	const context = await playwrightRequest.newContext({ baseURL });
	for (const next of OFF_SITE) {
		// form action (a plain post)
		const plain = await context.post('/sign-in', {
			form: { email: DEMO.pharmacist, password: DEMO_PASSWORD, next },
			headers: { origin: baseURL, accept: 'text/html' },
			maxRedirects: 0
		});
		expect(plain.status(), next).toBe(303);
		expect(plain.headers()['location'], next).toBe('/');
		// page load while signed in: straight on, to '/'
		const load = await context.get(`/sign-in?next=${encodeURIComponent(next)}`, { maxRedirects: 0 });
		expect(load.status(), next).toBe(303);
		expect(load.headers()['location'], next).toBe('/');
		// enhanced submit: the action answers with a redirect the client follows
		const enhanced = await context.post('/sign-in', {
			form: { email: DEMO.pharmacist, password: DEMO_PASSWORD, next },
			headers: { origin: baseURL, accept: 'application/json', 'x-sveltekit-action': 'true' },
			maxRedirects: 0
		});
		expect(await enhanced.json(), next).toEqual({ type: 'redirect', status: 303, location: '/' });
	}
	// a path on the site is kept
	const kept = await context.post('/sign-in', {
		form: { email: DEMO.pharmacist, password: DEMO_PASSWORD, next: '/board?ward=ICU' },
		headers: { origin: baseURL, accept: 'text/html' },
		maxRedirects: 0
	});
	expect(kept.headers()['location']).toBe('/board?ward=ICU');
	await context.dispose();

	// signed out, the page puts only the safe value in its hidden field
	const anonymous = await playwrightRequest.newContext({ baseURL });
	for (const next of OFF_SITE) {
		const html = await (await anonymous.get(`/sign-in?next=${encodeURIComponent(next)}`)).text();
		expect(html, next).toContain('name="next" value="/"');
		expect(html, next).not.toContain('evil.example');
	}
	await anonymous.dispose();
});

test('the redirect to sign-in thrown by the access guard carries the security headers', async () => {
	const context = await playwrightRequest.newContext({
		baseURL,
		storageState: {
			cookies: [
				{ name: 'ebbline_session', value: 'expired-or-forged', domain: '127.0.0.1', path: '/', expires: -1, httpOnly: true, secure: false, sameSite: 'Lax' }
			],
			origins: []
		}
	});
	const response = await context.get('/board?ward=ICU', { maxRedirects: 0 });
	expect(response.status()).toBe(303);
	const headers = response.headers();
	expect(headers['location']).toBe('/sign-in?next=%2Fboard%3Fward%3DICU');
	expect(headers['x-content-type-options']).toBe('nosniff');
	expect(headers['x-frame-options']).toBe('DENY');
	expect(headers['referrer-policy']).toBe('same-origin');
	expect(headers['x-request-id']).toMatch(/^[0-9a-f-]{36}$/);
	// the stale cookie is removed on the way
	expect(headers['set-cookie']).toMatch(/ebbline_session=;.*Max-Age=0/i);
	// over plain http no HSTS (it is sent when ORIGIN is https)
	expect(headers['strict-transport-security']).toBeUndefined();

	// a client-side navigation's data request gets the redirect as data, with the same headers
	const data = await context.get('/board/__data.json?x-sveltekit-invalidated=11', { maxRedirects: 0 });
	expect(data.status()).toBe(200);
	expect(await data.json()).toEqual({ type: 'redirect', location: '/sign-in?next=%2Fboard' });
	expect(data.headers()['x-frame-options']).toBe('DENY');
	await context.dispose();
});
