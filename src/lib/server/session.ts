import { DrizzlePostgreSQLAdapter } from '@lucia-auth/adapter-drizzle';
import type { Cookies } from '@sveltejs/kit';
import { eq, sql } from 'drizzle-orm';
import { Lucia, TimeSpan, type DatabaseSession, type DatabaseUser } from 'lucia';
import { getDb } from './db';
import { sessions, users, type Role } from './db/schema';
import { hashToken, randomToken } from './tokens';

export const SESSION_COOKIE = 'ebbline_session';
/** Sliding expiry: a session lives 12 h after its last use (lucia extends it past half-life). */
export const SESSION_LIFETIME = new TimeSpan(12, 'h');

/**
 * Lucia's Drizzle adapter, with the lookup every signed-in request makes as a prepared statement:
 * built once, parsed and planned once per connection.
 */
class SessionAdapter extends DrizzlePostgreSQLAdapter {
	private readonly lookup = getDb()
		.select({ user: users, session: sessions })
		.from(sessions)
		.innerJoin(users, eq(sessions.userId, users.id))
		.where(eq(sessions.id, sql.placeholder('sessionId')))
		.prepare('ebbline_session_and_user');

	override async getSessionAndUser(sessionId: string): Promise<[DatabaseSession | null, DatabaseUser | null]> {
		const rows = await this.lookup.execute({ sessionId });
		if (rows.length !== 1) return [null, null];
		const { id, userId, expiresAt, ...sessionAttributes } = rows[0].session;
		const { id: uid, ...userAttributes } = rows[0].user;
		return [
			{ id, userId, expiresAt, attributes: sessionAttributes },
			{ id: uid, attributes: userAttributes as unknown as DatabaseUser['attributes'] }
		];
	}
}

function createLucia() {
	return new Lucia(new SessionAdapter(getDb(), sessions, users), {
		sessionExpiresIn: SESSION_LIFETIME,
		sessionCookie: { name: SESSION_COOKIE },
		getUserAttributes: (row) => ({
			email: row.email,
			displayName: row.displayName,
			role: row.role,
			active: row.active
		})
	});
}

declare module 'lucia' {
	interface Register {
		Lucia: ReturnType<typeof createLucia>;
		DatabaseUserAttributes: { email: string; displayName: string; role: Role; active: boolean };
		UserId: string;
	}
}

let lucia: ReturnType<typeof createLucia> | undefined;
function auth() {
	lucia ??= createLucia();
	return lucia;
}

/**
 * The cookie holds a random token; the database holds only its SHA-256 hash as the session id,
 * so a leaked sessions table cannot be replayed.
 */
export async function createSession(userId: string) {
	const token = randomToken(24);
	const session = await auth().createSession(userId, {}, { sessionId: hashToken(token) });
	return { token, sessionId: session.id, expiresAt: session.expiresAt };
}

export async function validateSessionToken(token: string) {
	const { session, user } = await auth().validateSession(hashToken(token));
	if (!session || !user) return null;
	if (!user.active) {
		await auth().invalidateUserSessions(user.id);
		return null;
	}
	return { session, user };
}

export function invalidateSession(sessionId: string) {
	return auth().invalidateSession(sessionId);
}

export function invalidateUserSessions(userId: string) {
	return auth().invalidateUserSessions(userId);
}

export function setSessionCookie(cookies: Cookies, url: URL, token: string, expiresAt: Date) {
	cookies.set(SESSION_COOKIE, token, {
		path: '/',
		httpOnly: true,
		sameSite: 'lax',
		secure: url.protocol === 'https:',
		expires: expiresAt
	});
}

export function deleteSessionCookie(cookies: Cookies, url: URL) {
	cookies.delete(SESSION_COOKIE, { path: '/', httpOnly: true, sameSite: 'lax', secure: url.protocol === 'https:' });
}
