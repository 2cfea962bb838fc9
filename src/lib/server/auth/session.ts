import type { Cookies, RequestEvent } from '@sveltejs/kit';
import { eq, lt, or, sql } from 'drizzle-orm';
import { envNumber, ConfigError } from '../config';
import { getDb } from '../db';
import { sessions, users, userTotp, type Role } from '../db/schema';
import { hashToken, randomToken } from './tokens';

/**
 * Sessions written out by hand on Node's crypto: the cookie holds a random 256-bit token, the
 * database holds only its SHA-256 hash as the session id, so a leaked sessions table cannot be
 * replayed. A session slides (12 h after its last use, extended once more than half is used) and
 * also ends a fixed time after sign-in whatever its use (the absolute lifetime).
 */
export const SESSION_COOKIE = 'ebbline_session';
/** Over https the cookie carries the __Host- prefix: the browser then keeps it only if it is Secure, for Path=/ and with no Domain. */
export const SESSION_COOKIE_HTTPS = `__Host-${SESSION_COOKIE}`;
const HOUR_MS = 60 * 60 * 1000;
/** Sliding expiry: a session lives 12 h after its last use. */
export const SLIDING_MS = 12 * HOUR_MS;
export const DEFAULT_ABSOLUTE_H = 7 * 24;

/** EBBLINE_SESSION_ABSOLUTE_H: hours from sign-in after which a session ends however it is used (default 168 = 7 days). */
export function absoluteLifetimeMs(): number {
	const hours = envNumber('EBBLINE_SESSION_ABSOLUTE_H', DEFAULT_ABSOLUTE_H);
	if (hours < 1 || hours > 24 * 90) {
		throw new ConfigError(`Invalid configuration: EBBLINE_SESSION_ABSOLUTE_H=${hours} must be between 1 and 2160 hours (90 days).`);
	}
	return hours * HOUR_MS;
}

/** secondFactor: the user has an enrolled second factor (TOTP). */
export type SessionUser = { id: string; email: string; displayName: string; role: Role; active: boolean; secondFactor: boolean };
/** `fresh` is true when this validation extended the expiry, so the cookie must be sent again. */
export type Session = { id: string; userId: string; createdAt: Date; expiresAt: Date; fresh: boolean };

let lookup: ReturnType<typeof prepareLookup> | undefined;
/** The lookup every signed-in request makes, as a prepared statement: parsed and planned once per connection. */
function prepareLookup() {
	return getDb()
		.select({
			session: sessions,
			user: {
				id: users.id,
				email: users.email,
				displayName: users.displayName,
				role: users.role,
				active: users.active,
				secondFactor: sql<boolean>`${userTotp.enrolledAt} is not null`
			}
		})
		.from(sessions)
		.innerJoin(users, eq(sessions.userId, users.id))
		.leftJoin(userTotp, eq(userTotp.userId, users.id))
		.where(eq(sessions.id, sql.placeholder('sessionId')))
		.prepare('ebbline_session_and_user');
}

function expiryFrom(now: Date, createdAt: Date): Date {
	return new Date(Math.min(now.getTime() + SLIDING_MS, createdAt.getTime() + absoluteLifetimeMs()));
}

export async function createSession(userId: string, now = new Date()) {
	const token = randomToken(32);
	const sessionId = hashToken(token);
	const expiresAt = expiryFrom(now, now);
	await getDb().insert(sessions).values({ id: sessionId, userId, createdAt: now, expiresAt });
	return { token, sessionId, expiresAt };
}

export async function validateSessionToken(token: string, now = new Date()): Promise<{ session: Session; user: SessionUser } | null> {
	const sessionId = hashToken(token);
	lookup ??= prepareLookup();
	const [row] = await lookup.execute({ sessionId });
	if (!row) return null;
	const { session: stored, user } = row;
	const absoluteEnd = stored.createdAt.getTime() + absoluteLifetimeMs();
	if (now.getTime() >= stored.expiresAt.getTime() || now.getTime() >= absoluteEnd) {
		await invalidateSession(sessionId);
		return null;
	}
	if (!user.active) {
		await invalidateUserSessions(user.id);
		return null;
	}
	const session: Session = { ...stored, fresh: false };
	// extend once more than half the sliding window is used, never past the absolute end
	if (stored.expiresAt.getTime() - now.getTime() < SLIDING_MS / 2 && stored.expiresAt.getTime() < absoluteEnd) {
		session.expiresAt = expiryFrom(now, stored.createdAt);
		session.fresh = true;
		await getDb().update(sessions).set({ expiresAt: session.expiresAt }).where(eq(sessions.id, sessionId));
	}
	return { session, user };
}

export async function invalidateSession(sessionId: string) {
	await getDb().delete(sessions).where(eq(sessions.id, sessionId));
}

export async function invalidateUserSessions(userId: string) {
	await getDb().delete(sessions).where(eq(sessions.userId, userId));
}

/** Removes sessions past their sliding expiry or their absolute lifetime; returns how many. */
export async function removeExpired(now = new Date()) {
	const createdBefore = new Date(now.getTime() - absoluteLifetimeMs());
	const removed = await getDb()
		.delete(sessions)
		.where(or(lt(sessions.expiresAt, now), lt(sessions.createdAt, createdBefore)))
		.returning({ id: sessions.id });
	return removed.length;
}

export function sessionCookieName(url: URL) {
	return url.protocol === 'https:' ? SESSION_COOKIE_HTTPS : SESSION_COOKIE;
}

export function readSessionCookie(cookies: Cookies, url: URL) {
	return cookies.get(sessionCookieName(url));
}

export function setSessionCookie(cookies: Cookies, url: URL, token: string, expiresAt: Date) {
	cookies.set(sessionCookieName(url), token, {
		path: '/',
		httpOnly: true,
		sameSite: 'lax',
		secure: url.protocol === 'https:',
		expires: expiresAt
	});
}

export function deleteSessionCookie(cookies: Cookies, url: URL) {
	cookies.delete(sessionCookieName(url), { path: '/', httpOnly: true, sameSite: 'lax', secure: url.protocol === 'https:' });
}

/**
 * The Set-Cookie header that removes a session cookie the request carried but that found no
 * session, for a response built outside SvelteKit's resolve (which would otherwise add it); else null.
 */
export function staleCookieHeader(event: Pick<RequestEvent, 'cookies' | 'url' | 'request' | 'locals'>): string | null {
	const name = sessionCookieName(event.url);
	const carried = (event.request.headers.get('cookie') ?? '').split(';').some((part) => part.trim().startsWith(`${name}=`));
	if (!carried || event.locals.user) return null;
	return event.cookies.serialize(name, '', { path: '/', httpOnly: true, sameSite: 'lax', secure: event.url.protocol === 'https:', maxAge: 0 });
}
