import { isHttpError, isRedirect } from '@sveltejs/kit';
import { describe, expect, it } from 'vitest';
import { accessFor, isAllowed, requirePageRole, requireRole, routeAccess } from '../../../../src/lib/server/auth/access';

const locals = (role: App.SessionUser['role'] | null, feed = false): App.Locals => ({
	denied: false,
	requestId: 'test',
	sessionId: role ? 's' : null,
	user: role ? { id: 'u1', email: `${role}@larkspur.test`, displayName: role, role } : null,
	feedToken: feed ? { id: 't1', name: 'lab system' } : null
});

function thrown(fn: () => unknown) {
	try {
		fn();
	} catch (error) {
		return error;
	}
	throw new Error('expected a throw');
}

describe('requireRole', () => {
	it('returns the user when the role is allowed', () => {
		expect(requireRole(locals('pharmacist'), 'pharmacist', 'admin').role).toBe('pharmacist');
	});
	it('answers 401 to an anonymous visitor', () => {
		const error = thrown(() => requireRole(locals(null), 'admin'));
		expect(isHttpError(error) && error.status).toBe(401);
	});
	it('answers 403 to a signed-in user with another role', () => {
		const error = thrown(() => requireRole(locals('physician'), 'pharmacist', 'admin'));
		expect(isHttpError(error) && error.status).toBe(403);
	});
	it('sends an anonymous page visitor to sign in and back', () => {
		const error = thrown(() => requirePageRole(locals(null), new URL('http://x/admin/users?tab=2'), 'admin'));
		expect(isRedirect(error) && error.location).toBe('/sign-in?next=%2Fadmin%2Fusers%3Ftab%3D2');
	});
});

describe('routeAccess (deny by default)', () => {
	it('denies a route that has no row, whoever asks', () => {
		const access = accessFor('/a-route-nobody-declared');
		expect(access).toBeUndefined();
		for (const role of ['pharmacist', 'physician', 'admin'] as const) expect(isAllowed(access, locals(role))).toBe(false);
	});
	it('opens admin pages to administrators only', () => {
		const access = routeAccess['/admin/users'];
		expect(isAllowed(access, locals('admin'))).toBe(true);
		expect(isAllowed(access, locals('pharmacist'))).toBe(false);
		expect(isAllowed(access, locals('physician'))).toBe(false);
		expect(isAllowed(access, locals(null))).toBe(false);
	});
	it('lets a feed token, and only a feed token, through a feed route', () => {
		expect(isAllowed('feed', locals(null, true))).toBe(true);
		expect(isAllowed('feed', locals('admin'))).toBe(false);
	});
	it('keeps sign-in public', () => {
		expect(isAllowed(routeAccess['/sign-in'], locals(null))).toBe(true);
	});
});
