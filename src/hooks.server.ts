import { isRedirect, json, redirect, type Handle, type HandleServerError, type ServerInit } from '@sveltejs/kit';
import { sequence } from '@sveltejs/kit/hooks';
import { randomUUID } from 'node:crypto';
import { feedTokens, secondFactor, sessions as session } from '$lib/server/auth';
import { accessFor, isAllowed, isRouteSwitchedOff, mustEnrolFirst } from '$lib/server/auth/access';
import { accessLog } from '$lib/server/audit';
import { causeCodes, isDatabaseUnavailable } from '$lib/server/db/errors';
import { queryStringProblem, applySecurityHeaders } from '$lib/server/http';
import { actionBodyProblem, actionNameProblem, isFormActionPost } from '$lib/server/http/form-actions';
import { noteWrite } from '$lib/server/flags';
import { logger } from '$lib/server/logger';
import { startEmbeddedWorkers } from '$lib/server/queue/embedded';

export const init: ServerInit = async () => {
	session.absoluteLifetimeMs(); // a malformed EBBLINE_SESSION_ABSOLUTE_H stops the start, naming it
	secondFactor.checkConfiguration(); // so does a malformed EBBLINE_ADMIN_TOTP or EBBLINE_TOTP_KEY
	// the server library never imports jobs/: the entry hands the workers (and their queue policies) in
	await startEmbeddedWorkers(() => import('../jobs/worker'));
};

const isApi = (url: URL) => url.pathname.startsWith('/api/');

function unavailable(url: URL) {
	const message = 'Ebbline cannot reach its database just now. Please try again in a moment.';
	return isApi(url)
		? json({ error: message }, { status: 503, headers: { 'retry-after': '5' } })
		: new Response(`<!doctype html><title>Ebbline — unavailable</title><p>${message}</p>`, {
				status: 503,
				headers: { 'content-type': 'text/html; charset=utf-8', 'retry-after': '5' }
			});
}

/** Request id and one structured log line per request (ids only, never patient data). */
const handleRequestLog: Handle = async ({ event, resolve }) => {
	const started = performance.now();
	event.locals.requestId = randomUUID();
	event.locals.user = null;
	event.locals.sessionId = null;
	event.locals.feedToken = null;
	event.locals.denied = false;
	let response: Response;
	try {
		response = await resolve(event);
	} catch (err) {
		if (isDatabaseUnavailable(err)) response = unavailable(event.url);
		else throw err;
	}
	// an endpoint or load that failed on a lost database has become a 500 inside SvelteKit: it is a 503
	if (event.locals.databaseUnavailable && response.status >= 500) response = unavailable(event.url);
	response.headers.set('x-request-id', event.locals.requestId);
	const user = event.locals.user as App.SessionUser | null;
	// the board cache lets this user read past it for a moment, so their own change shows at once
	if (user && event.request.method !== 'GET' && event.request.method !== 'HEAD') noteWrite(user.id);
	logger.info('request', {
		requestId: event.locals.requestId,
		method: event.request.method,
		route: event.route.id ?? 'unmatched',
		status: response.status,
		ms: Math.round(performance.now() - started),
		user: user?.id ?? null
	});
	return response;
};

const handleSession: Handle = async ({ event, resolve }) => {
	const token = session.readSessionCookie(event.cookies, event.url);
	if (token) {
		const found = await session.validateSessionToken(token);
		if (found) {
			const { session: s, user } = found;
			event.locals.user = { id: user.id, email: user.email, displayName: user.displayName, role: user.role };
			event.locals.sessionId = s.id;
			event.locals.secondFactor = user.secondFactor;
			if (s.fresh) session.setSessionCookie(event.cookies, event.url, token, s.expiresAt);
		} else {
			session.deleteSessionCookie(event.cookies, event.url);
		}
	}
	return resolve(event);
};

/** Feed clients authenticate with a bearer token, never with a browser session. */
const handleFeedToken: Handle = async ({ event, resolve }) => {
	const header = event.request.headers.get('authorization');
	if (event.url.pathname.startsWith('/api/v1/feed') && header?.startsWith('Bearer ')) {
		const found = await feedTokens.check(header.slice(7).trim());
		if (found.state === 'expired') {
			const error = `Unauthorised: this feed token expired on ${found.expiredAt.toISOString()}. Ask an Ebbline administrator for a new one.`;
			return json({ error, issues: { authorization: 'expired token' } }, { status: 401 });
		}
		event.locals.feedToken = found.state === 'valid' ? found.token : null;
	}
	return resolve(event);
};

/** A query string PostgreSQL could not take (a NUL, an unpaired surrogate) is a 400 naming the parameter. */
const handleQueryString: Handle = async ({ event, resolve }) => {
	const problem = queryStringProblem(event.url);
	if (!problem) return resolve(event);
	const message = `Query parameter ${problem.parameter} ${problem.reason}.`;
	return isApi(event.url)
		? json({ error: message, issues: { [problem.parameter]: problem.reason } }, { status: 400 })
		: new Response(message, { status: 400, headers: { 'content-type': 'text/plain; charset=utf-8' } });
};

/** Deny by default: every route needs a row in routeAccess. */
const handleGuard: Handle = async ({ event, resolve }) => {
	// an administrator without the required second factor sets it up before anything else
	if (mustEnrolFirst(event.locals, event.route.id, secondFactor.adminTotpRequired())) {
		const message = 'Set up your second factor (an authenticator app) first: administrators must have one.';
		if (isApi(event.url)) return json({ error: message }, { status: 403 });
		if (event.request.method === 'GET' || event.request.method === 'HEAD') redirect(303, '/account/security');
		return new Response(message, { status: 403, headers: { 'content-type': 'text/plain; charset=utf-8' } });
	}
	if (event.route.id === null) return resolve(event); // unmatched: the 404 page
	if (isRouteSwitchedOff(event.route.id)) return resolve(event); // its load answers the 404 page
	const access = accessFor(event.route.id);
	if (isAllowed(access, event.locals)) return resolve(event);
	const signedIn = event.locals.user !== null || event.locals.feedToken !== null;
	// a signed-in caller refused here (an API or a form action outside their role) is on record too
	if (event.locals.user !== null && (isApi(event.url) || (event.request.method !== 'GET' && event.request.method !== 'HEAD')))
		accessLog.recordRefusal(event.locals, event.route.id);
	if (isApi(event.url)) {
		return json(
			{ error: signedIn ? 'Forbidden: your role does not give access to this endpoint.' : 'Unauthorised: sign in or send a valid bearer token.' },
			{ status: signedIn ? 403 : 401 }
		);
	}
	if (!signedIn && access !== 'feed' && event.request.method === 'GET') {
		redirect(303, `/sign-in?next=${encodeURIComponent(event.url.pathname + event.url.search)}`);
	}
	if (event.request.method !== 'GET' && event.request.method !== 'HEAD') {
		// a form action: refuse before it runs
		return new Response('Forbidden: your role does not give access to this action.', { status: signedIn ? 403 : 401 });
	}
	// A page. Declared pages guard their own load with requirePageRole, which renders the designed
	// 403 page inside the shell; a page with no row at all is stopped by the root layout.
	event.locals.denied = access === undefined;
	return resolve(event);
};

/** A form action post SvelteKit would answer with a 500 (a reserved or prototype name, an unreadable body) gets a 4xx. */
const handleFormAction: Handle = async ({ event, resolve }) => {
	if (!isFormActionPost(event.request.method, event.route.id, event.url)) return resolve(event);
	const problem = actionNameProblem(event.url) ?? (await actionBodyProblem(event.request));
	if (!problem) return resolve(event);
	const enhanced = event.request.headers.get('accept')?.includes('application/json');
	return enhanced
		? json({ type: 'error', error: { message: problem.message } }, { status: problem.status })
		: new Response(problem.message, { status: problem.status, headers: { 'content-type': 'text/plain; charset=utf-8' } });
};

const handleSecurityHeaders: Handle = async ({ event, resolve }) => {
	let response: Response;
	try {
		response = await resolve(event);
	} catch (err) {
		// A redirect thrown by a later handle (the guard's to /sign-in) would leave without these
		// headers: answer it here as SvelteKit would (JSON for a client-side navigation's data request)
		if (!isRedirect(err)) throw err;
		response = event.isDataRequest
			? new Response(JSON.stringify({ type: 'redirect', location: err.location }), {
					headers: { 'content-type': 'application/json', 'cache-control': 'private, no-store' }
				})
			: new Response(null, { status: err.status, headers: { location: err.location } });
		// the session handle's removal of a stale cookie must not be lost on the way
		const stale = session.staleCookieHeader(event);
		if (stale) response.headers.append('set-cookie', stale);
	}
	applySecurityHeaders(response.headers, event.url, event.locals.user !== null);
	return response;
};

export const handle = sequence(handleRequestLog, handleSecurityHeaders, handleQueryString, handleSession, handleFeedToken, handleGuard, handleFormAction);

export const handleError: HandleServerError = ({ error: err, event, status }) => {
	const requestId = event.locals.requestId;
	if (status !== 404) {
		logger.error('unhandled error', {
			requestId,
			route: event.route.id ?? 'unmatched',
			error: err instanceof Error ? err.message : String(err),
			causes: causeCodes(err).join(' < ') || null,
			stack: err instanceof Error ? (err.stack ?? null) : null
		});
	}
	if (isDatabaseUnavailable(err)) {
		event.locals.databaseUnavailable = true;
		return { message: 'Ebbline cannot reach its database just now. Please try again in a moment.', requestId };
	}
	// SvelteKit's own 404 for a form action the page does not have: name the action
	const unknownAction = status === 404 && err instanceof Error ? /^No action with name '(.*)' found$/s.exec(err.message) : null;
	if (unknownAction) return { message: `No form action named '${unknownAction[1].slice(0, 60)}' on this page.`, requestId };
	return { message: status === 404 ? 'Page not found.' : 'Something went wrong on our side. The error has been logged.', requestId };
};
