// Every rules and agent-library route and API is for administrators only: the route table says so, and
// each load, action and handler checks again (deny by default, DEVELOPERS.md).
import { isHttpError, isRedirect } from '@sveltejs/kit';
import { describe, expect, it } from 'vitest';
import { isAllowed, routeAccess } from '../../../../src/lib/server/auth/access';
import { navFor } from '../../../../src/lib/navigation';
import * as rulesPage from '../../../../src/routes/admin/rules/+page.server';
import * as agentsPage from '../../../../src/routes/admin/agents/+page.server';
import * as backtestApi from '../../../../src/routes/api/v1/admin/rules/backtest/+server';
import * as replaysApi from '../../../../src/routes/api/v1/admin/rules/replays/[id]/+server';

type Role = 'pharmacist' | 'physician' | 'admin';
const locals = (role: Role | null): App.Locals => ({
	requestId: 'test',
	sessionId: role ? 's' : null,
	user: role ? { id: '00000000-0000-4000-8000-000000000001', email: `${role}@larkspur.test`, displayName: role, role } : null,
	feedToken: null,
	denied: false
});

const ROUTES = ['/admin/rules', '/admin/agents', '/api/v1/admin/rules/backtest', '/api/v1/admin/rules/replays/[id]'];

async function status(fn: () => unknown): Promise<number | string> {
	try {
		await fn();
	} catch (error) {
		if (isHttpError(error)) return error.status;
		if (isRedirect(error)) return `redirect ${error.location}`;
		throw error;
	}
	return 'no error';
}

const request = () => new Request('http://localhost/x', { method: 'POST', body: new URLSearchParams({ versionId: 'x' }) });
// the handlers under test throw before they read anything else from the event
// eslint-disable-next-line @typescript-eslint/no-explicit-any
const event = (role: Role | null, extra: Record<string, unknown> = {}): any => ({
	locals: locals(role),
	url: new URL('http://localhost/admin/rules'),
	request: request(),
	params: { id: 'x' },
	...extra
});

describe('rules and agents routes', () => {
	it('are declared in routeAccess for administrators only', () => {
		for (const route of ROUTES) {
			expect(routeAccess[route], route).toEqual(['admin']);
			expect(isAllowed(routeAccess[route], locals('admin')), route).toBe(true);
			for (const role of ['pharmacist', 'physician', null] as const) expect(isAllowed(routeAccess[route], locals(role)), `${route} ${role}`).toBe(false);
		}
	});

	it('are in the administrator’s navigation and nobody else’s', () => {
		expect(navFor('admin').map((i) => i.label)).toEqual(expect.arrayContaining(['Rules', 'Agents']));
		for (const role of ['pharmacist', 'physician'] as const) expect(navFor(role).map((i) => i.href)).not.toContain('/admin/rules');
	});

	for (const role of ['pharmacist', 'physician'] as const) {
		it(`answer 403 to a ${role} in every load, action and API handler`, async () => {
			expect(await status(() => rulesPage.load(event(role)))).toBe(403);
			for (const name of ['save', 'publish', 'rollBack'] as const) expect(await status(() => rulesPage.actions[name](event(role))), name).toBe(403);
			expect(await status(() => agentsPage.load(event(role)))).toBe(403);
			expect(await status(() => agentsPage.actions.save(event(role)))).toBe(403);
			expect(await status(() => backtestApi.POST(event(role)))).toBe(403);
			expect(await status(() => replaysApi.GET(event(role)))).toBe(403);
		});
	}

	it('send an anonymous visitor to sign in (pages) or answer 401 (actions and APIs)', async () => {
		expect(await status(() => rulesPage.load(event(null)))).toBe('redirect /sign-in?next=%2Fadmin%2Frules');
		expect(await status(() => rulesPage.actions.publish(event(null)))).toBe(401);
		expect(await status(() => backtestApi.POST(event(null)))).toBe(401);
		expect(await status(() => replaysApi.GET(event(null)))).toBe(401);
	});
});
