import { error, redirect } from '@sveltejs/kit';
import { getRequestEvent } from '$app/server';
import { recordRefusal } from '../audit/access-log';
import { config } from '../config';
import type { Role } from '../db/schema';

/**
 * Who may reach each route, by SvelteKit route id. Everything is denied by default: a route missing
 * from this table answers 403 to everyone (and the access-matrix test fails until it has a row).
 * - 'public': anyone, signed in or not
 * - 'feed': a machine client with a feed bearer token (never a browser session)
 * - Role[]: signed-in users with one of these roles
 */
export type Access = 'public' | 'feed' | readonly Role[];

const ANY_ROLE = ['pharmacist', 'physician', 'admin'] as const;
const STEWARDS = ['pharmacist', 'admin'] as const;
const ADMIN = ['admin'] as const;

export const routeAccess: Record<string, Access> = {
	'/': ANY_ROLE,
	'/sign-in': 'public',
	'/sign-in/second-factor': 'public',
	'/account/security': ANY_ROLE,
	'/sign-out': 'public',
	'/health': 'public',
	'/admin/users': ADMIN,
	// rules and the agent library
	'/admin/rules': ADMIN,
	'/admin/agents': ADMIN,
	'/api/v1/admin/rules/backtest': ADMIN,
	'/api/v1/admin/rules/replays/[id]': ADMIN,
	// feed: machine intake, CSV upload, quarantine and feed tokens
	'/api/v1/feed': 'feed',
	'/feed/upload': STEWARDS,
	'/feed/upload/chunk': STEWARDS,
	'/feed/upload/template/[kind]': STEWARDS,
	'/admin/quarantine': ADMIN,
	'/admin/feed-tokens': ADMIN,
	// triage board and patient view
	'/board': STEWARDS,
	'/flags/[id]': STEWARDS,
	'/patients/[id]': ANY_ROLE,
	'/api/v1/flags': STEWARDS,
	'/api/v1/flags/[id]': STEWARDS,
	'/api/v1/flags/[id]/events': STEWARDS,
	'/api/v1/patients/[id]': ANY_ROLE,
	'/api/v1/patients/[id]/projection': ANY_ROLE,
	// stewardship report and audit log
	'/reports': STEWARDS,
	'/reports/export/[table]': STEWARDS,
	'/admin/audit': ADMIN,
	'/admin/audit/export': ADMIN,
	'/admin/access': ADMIN,
	'/admin/access/export': ADMIN,
	// recommendations to physicians
	'/flags/[id]/recommend': STEWARDS,
	'/respond/[token]': 'public',
	'/account/setup/[token]': 'public',
	'/recommendations': ['physician', 'admin'],
	'/api/v1/recommendations/[id]/withdraw': STEWARDS,
	'/admin/mail': ADMIN,
	'/notifications': ANY_ROLE,
	'/admin/settings': ADMIN,
	'/dev/mail': ADMIN
};

/**
 * A development-only route that is switched off: /dev/mail without EBBLINE_DEV_MAILBOX=on. It answers
 * the 404 page to everyone, administrators and visitors alike, as if it did not exist.
 */
export function isRouteSwitchedOff(routeId: string | null): boolean {
	return routeId === '/dev/mail' && !config.devMailbox;
}

/** Where an administrator who must set up a second factor may go before they have (everything else waits). */
const ENROLMENT_ROUTES = new Set(['/account/security', '/sign-out', '/sign-in', '/sign-in/second-factor', '/health']);

/**
 * True when the signed-in user is an administrator without a second factor while one is required
 * for administrators (EBBLINE_ADMIN_TOTP is not 'optional'), and the route is not part of setting
 * it up: the hook sends them to /account/security instead.
 */
export function mustEnrolFirst(locals: App.Locals, routeId: string | null, required: boolean): boolean {
	if (!required || !locals.user || locals.user.role !== 'admin' || locals.secondFactor) return false;
	return routeId === null || !ENROLMENT_ROUTES.has(routeId);
}

export function accessFor(routeId: string | null): Access | undefined {
	return routeId === null ? undefined : routeAccess[routeId];
}

export function isAllowed(access: Access | undefined, locals: App.Locals): boolean {
	if (access === undefined) return false;
	if (access === 'public') return true;
	if (access === 'feed') return locals.feedToken !== null;
	return locals.user !== null && access.includes(locals.user.role);
}

/**
 * The one guard for loads, actions and API handlers: returns the signed-in user when their role is
 * among `roles`, otherwise throws 401 (not signed in) or 403 (wrong role).
 */
export function requireRole(locals: App.Locals, ...roles: Role[]): App.SessionUser {
	if (!locals.user) error(401, 'Sign in to continue.');
	if (roles.length > 0 && !roles.includes(locals.user.role)) {
		recordRefusal(locals, currentRoute());
		error(403, 'Your role does not give access to this page.');
	}
	return locals.user;
}

/** The route being answered, for the access log; a guard called outside a request (a test) names none. */
function currentRoute(): string {
	try {
		return getRequestEvent().route.id ?? 'unmatched';
	} catch {
		return 'outside a request';
	}
}

/** For pages: an anonymous visitor is sent to sign in and brought back afterwards. */
export function requirePageRole(locals: App.Locals, url: URL, ...roles: Role[]): App.SessionUser {
	if (!locals.user) redirect(303, `/sign-in?next=${encodeURIComponent(url.pathname + url.search)}`);
	return requireRole(locals, ...roles);
}
