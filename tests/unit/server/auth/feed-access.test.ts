// Who may reach the feed's routes (deny by default; the table in src/lib/server/auth/access.ts).
import { describe, expect, it } from 'vitest';
import { isAllowed, routeAccess } from '../../../../src/lib/server/auth/access';
import { navFor } from '../../../../src/lib/navigation';

const locals = (role: App.SessionUser['role'] | null, feed = false): App.Locals => ({
	denied: false,
	requestId: 'test',
	sessionId: role ? 's' : null,
	user: role ? { id: 'u1', email: `${role}@larkspur.test`, displayName: role, role } : null,
	feedToken: feed ? { id: 't1', name: 'laboratory system' } : null
});

const matrix: [string, (App.SessionUser['role'] | 'feed' | 'anonymous')[]][] = [
	['/api/v1/feed', ['feed']],
	['/feed/upload', ['pharmacist', 'admin']],
	['/feed/upload/chunk', ['pharmacist', 'admin']],
	['/feed/upload/template/[kind]', ['pharmacist', 'admin']],
	['/admin/quarantine', ['admin']],
	['/admin/feed-tokens', ['admin']]
];

describe('feed routes', () => {
	for (const [route, allowed] of matrix) {
		it(`${route} is open to ${allowed.join(', ')} only`, () => {
			const access = routeAccess[route];
			expect(access).toBeDefined();
			expect(isAllowed(access, locals('pharmacist'))).toBe(allowed.includes('pharmacist'));
			expect(isAllowed(access, locals('physician'))).toBe(false);
			expect(isAllowed(access, locals('admin'))).toBe(allowed.includes('admin'));
			expect(isAllowed(access, locals(null))).toBe(false);
			expect(isAllowed(access, locals(null, true))).toBe(allowed.includes('feed'));
		});
	}
	it('a browser session, even an administrator’s, cannot post to the feed', () => {
		expect(isAllowed(routeAccess['/api/v1/feed'], locals('admin'))).toBe(false);
	});
	it('puts the upload page in the stewards’ navigation and the feed admin pages in the administrator’s', () => {
		expect(navFor('pharmacist').map((i) => i.href)).toContain('/feed/upload');
		expect(navFor('physician').map((i) => i.href)).not.toContain('/feed/upload');
		expect(navFor('admin').map((i) => i.href)).toEqual(expect.arrayContaining(['/feed/upload', '/admin/quarantine', '/admin/feed-tokens']));
	});
});
