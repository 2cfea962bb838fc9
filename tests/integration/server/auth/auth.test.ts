import { and, eq, like } from 'drizzle-orm';
import { hash } from '@node-rs/argon2';
import { afterEach, beforeAll, describe, expect, it } from 'vitest';
import { sessionCleanup } from '../../../../jobs/session-cleanup';
import { getDb } from '../../../../src/lib/server/db';
import { auditLog, sessions, signInThrottle, users } from '../../../../src/lib/server/db/schema';
import { hashPassword, needsRehash, verifyPassword, sessions as session, throttle, hashToken, users as userService } from '../../../../src/lib/server/auth';

const PASSWORD = 'correct horse battery';
const system = { actorId: null, actorLabel: 'test', requestId: null };

async function makeUser(email: string, role: 'pharmacist' | 'physician' | 'admin' = 'pharmacist') {
	const row = await userService.create({ email, displayName: 'Test Person', role, password: PASSWORD }, system);
	return row.id;
}

async function auditActions(label: string) {
	const rows = await getDb().select({ action: auditLog.action }).from(auditLog).where(eq(auditLog.actorLabel, label)).orderBy(auditLog.id);
	return rows.map((r) => r.action);
}

describe('sign-in', () => {
	beforeAll(async () => {
		await makeUser('ok@larkspur.test');
	});

	it('creates a session whose id is the hash of the cookie token, and audits it', async () => {
		const result = await userService.signIn('OK@larkspur.test ', PASSWORD, '10.0.0.1', 'req-1');
		expect(result.ok).toBe(true);
		if (!result.ok) return;
		const [stored] = await getDb()
			.select()
			.from(sessions)
			.where(eq(sessions.id, hashToken(result.token)));
		expect(stored).toBeDefined();
		// the raw token is never stored
		const raw = await getDb().select().from(sessions).where(eq(sessions.id, result.token));
		expect(raw).toHaveLength(0);
		expect((await session.validateSessionToken(result.token))?.user.email).toBe('ok@larkspur.test');
		expect(await auditActions('ok@larkspur.test')).toContain('auth.sign_in');
	});

	it('gives every sign-in a new session id (no fixation)', async () => {
		const a = await userService.signIn('ok@larkspur.test', PASSWORD, '10.0.0.2', null);
		const b = await userService.signIn('ok@larkspur.test', PASSWORD, '10.0.0.2', null);
		expect(a.ok && b.ok && a.token !== b.token).toBe(true);
	});

	it('refuses a wrong password and writes a failure row', async () => {
		await makeUser('wrong@larkspur.test');
		const result = await userService.signIn('wrong@larkspur.test', 'not the password', '10.0.0.3', null);
		expect(result).toEqual({ ok: false, reason: 'invalid' });
		expect(await auditActions('wrong@larkspur.test')).toEqual(['auth.sign_in_failed']);
	});

	it('gives an unknown address the same answer as a wrong password', async () => {
		const result = await userService.signIn('nobody@larkspur.test', 'whatever', '10.0.0.4', null);
		expect(result).toEqual({ ok: false, reason: 'invalid' });
	});

	it('locks an account after repeated failures, even with the right password, and audits the lock-out', async () => {
		await makeUser('locked@larkspur.test');
		const outcomes = [];
		for (let i = 0; i < throttle.MAX_FAILURES; i++) {
			// vary the address so the per-address counter does not lock first
			outcomes.push(await userService.signIn('locked@larkspur.test', 'bad', `10.1.0.${i}`, null));
		}
		expect(outcomes.at(-1)).toMatchObject({ ok: false, reason: 'locked' });
		const right = await userService.signIn('locked@larkspur.test', PASSWORD, '10.1.0.99', null);
		expect(right).toMatchObject({ ok: false, reason: 'locked' });
		const actions = await auditActions('locked@larkspur.test');
		expect(actions.filter((a) => a === 'auth.locked_out')).toHaveLength(1);
		expect(actions).toContain('auth.sign_in_refused_locked');
	}, 30_000);

	it('lets one address (a ward behind a proxy) fail more often than one account before locking', async () => {
		for (let i = 0; i < throttle.MAX_FAILURES; i++) {
			await userService.signIn(`typo${i}@larkspur.test`, 'bad', '10.8.8.8', null);
		}
		await makeUser('colleague@larkspur.test');
		expect((await userService.signIn('colleague@larkspur.test', PASSWORD, '10.8.8.8', null)).ok).toBe(true);
	}, 60_000);

	it('refuses wrong passwords from an address that sprayed many accounts, but lets the right password in', async () => {
		// the first failures recorded directly (signIn would sleep through its slow-down each time)
		for (let i = 0; i < throttle.MAX_ADDRESS_FAILURES - 1; i++) await throttle.fail('ip:10.9.9.9');
		const last = await userService.signIn('spray@larkspur.test', 'bad', '10.9.9.9', null);
		expect(last).toMatchObject({ ok: false, reason: 'address_locked' });
		expect((await auditActions('spray@larkspur.test')).filter((a) => a === 'auth.locked_out')).toHaveLength(1);
		await makeUser('innocent@larkspur.test');
		expect(await userService.signIn('innocent@larkspur.test', 'a wrong guess', '10.9.9.9', null)).toMatchObject({ ok: false, reason: 'address_locked' });
		const right = await userService.signIn('innocent@larkspur.test', PASSWORD, '10.9.9.9', null);
		expect(right.ok).toBe(true);
		// a colleague's success does not wipe the address's count: the lock and its count stay
		const after = await throttle.check('ip:10.9.9.9');
		expect(after.locked).toBe(true);
		expect(after.failures).toBe(throttle.MAX_ADDRESS_FAILURES + 1);
		// while the innocent account's own count was cleared by its success
		expect((await throttle.check('email:innocent@larkspur.test')).failures).toBe(0);
	}, 120_000);

	it('does not clear the address count on a success below the lock either', async () => {
		await makeUser('shared@larkspur.test');
		for (let i = 0; i < 3; i++) await throttle.fail('ip:10.7.7.7');
		expect((await userService.signIn('shared@larkspur.test', PASSWORD, '10.7.7.7', null)).ok).toBe(true);
		expect((await throttle.check('ip:10.7.7.7')).failures).toBe(3);
	}, 30_000);

	it('counts 30 parallel failures on one key exactly, and exactly one of them locks it', async () => {
		const results = await Promise.all(Array.from({ length: 30 }, () => throttle.fail('email:parallel@larkspur.test')));
		expect(results.map((r) => r.failures).sort((a, b) => a - b)).toEqual(Array.from({ length: 30 }, (_, i) => i + 1));
		expect(results.filter((r) => r.lockedNow)).toHaveLength(1);
		const state = await throttle.check('email:parallel@larkspur.test');
		expect(state).toMatchObject({ locked: true, failures: 30 });
	});

	it('counts 30 parallel wrong guesses from one address exactly', async () => {
		const guesses = await Promise.all(Array.from({ length: 30 }, (_, i) => userService.signIn(`guess${i}@larkspur.test`, 'not it', '10.30.30.30', null)));
		expect(guesses.every((g) => !g.ok)).toBe(true);
		expect((await throttle.check('ip:10.30.30.30')).failures).toBe(30);
		const [row] = await getDb().select().from(signInThrottle).where(eq(signInThrottle.key, 'ip:10.30.30.30'));
		expect(row.failures).toBe(30);
		// the address reached its limit once: one lock-out on record
		const lockouts = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.action, 'auth.locked_out'), like(auditLog.actorLabel, 'guess%@larkspur.test')));
		expect(lockouts).toHaveLength(1);
		expect(lockouts[0].after).toMatchObject({ address: '10.30.30.30', scope: 'address' });
	}, 60_000);

	it('counts every parallel wrong guess at one account that reached the password check', async () => {
		await makeUser('target@larkspur.test');
		const guesses = await Promise.all(Array.from({ length: 30 }, (_, i) => userService.signIn('target@larkspur.test', `guess ${i}`, `10.31.0.${i}`, null)));
		expect(guesses.every((g) => !g.ok)).toBe(true);
		const actions = await auditActions('target@larkspur.test');
		const checked = actions.filter((a) => a === 'auth.sign_in_failed').length;
		expect(checked + actions.filter((a) => a === 'auth.sign_in_refused_locked').length).toBe(30);
		const [row] = await getDb().select().from(signInThrottle).where(eq(signInThrottle.key, 'email:target@larkspur.test'));
		expect(row.failures).toBe(checked);
		expect(row.lockedUntil).not.toBeNull();
	}, 60_000);

	it('refuses a deactivated user and ends their sessions', async () => {
		const id = await makeUser('leaver@larkspur.test');
		const first = await userService.signIn('leaver@larkspur.test', PASSWORD, '10.0.0.5', null);
		expect(first.ok).toBe(true);
		await userService.update(id, { active: false }, system);
		if (first.ok) expect(await session.validateSessionToken(first.token)).toBeNull();
		const again = await userService.signIn('leaver@larkspur.test', PASSWORD, '10.0.0.5', null);
		expect(again).toEqual({ ok: false, reason: 'deactivated' });
		const rows = await getDb()
			.select({ action: auditLog.action })
			.from(auditLog)
			.where(and(eq(auditLog.objectId, id), eq(auditLog.action, 'user.deactivated')));
		expect(rows).toHaveLength(1);
	});

	it('does not accept an expired session', async () => {
		const id = await makeUser('expired@larkspur.test');
		const created = await session.createSession(id);
		await getDb()
			.update(sessions)
			.set({ expiresAt: new Date(Date.now() - 1000) })
			.where(eq(sessions.id, created.sessionId));
		expect(await session.validateSessionToken(created.token)).toBeNull();
	});

	it('extends a session that is past half its lifetime (sliding expiry)', async () => {
		const id = await makeUser('sliding@larkspur.test');
		const created = await session.createSession(id);
		const soon = new Date(Date.now() + 60 * 60 * 1000); // 1 h left of 12 h
		await getDb().update(sessions).set({ expiresAt: soon }).where(eq(sessions.id, created.sessionId));
		const validated = await session.validateSessionToken(created.token);
		expect(validated?.session.fresh).toBe(true);
		expect(validated!.session.expiresAt.getTime()).toBeGreaterThan(soon.getTime() + 5 * 60 * 60 * 1000);
	});

	it('audits a role change once, with before and after', async () => {
		const id = await makeUser('promoted@larkspur.test');
		await userService.update(id, { role: 'admin' }, { actorId: null, actorLabel: 'admin-test', requestId: 'r' });
		const rows = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.objectId, id), like(auditLog.action, 'user.role%')));
		expect(rows).toHaveLength(1);
		expect(rows[0].before).toEqual({ role: 'pharmacist' });
		expect(rows[0].after).toEqual({ role: 'admin' });
	});

	it('never stores a password in clear', async () => {
		const [row] = await getDb().select({ hash: users.passwordHash }).from(users).where(eq(users.email, 'ok@larkspur.test'));
		expect(row.hash.startsWith('$argon2id$')).toBe(true);
	});
});

describe('sessions', () => {
	const HOUR = 60 * 60 * 1000;
	const sessionRow = async (id: string) => (await getDb().select().from(sessions).where(eq(sessions.id, id)))[0];

	afterEach(() => {
		delete process.env.EBBLINE_SESSION_ABSOLUTE_H;
	});

	it('starts with a 12-hour sliding expiry and records when it was created', async () => {
		const id = await makeUser('fresh-session@larkspur.test');
		const now = new Date();
		const created = await session.createSession(id, now);
		const row = await sessionRow(created.sessionId);
		expect(row.createdAt.getTime()).toBe(now.getTime());
		expect(row.expiresAt.getTime()).toBe(now.getTime() + 12 * HOUR);
		expect(created.token).toMatch(/^[A-Za-z0-9_-]{43}$/); // 256 random bits
	});

	it('ends a session at its absolute lifetime (7 days by default) however recently it was used', async () => {
		const id = await makeUser('long-shift@larkspur.test');
		const signedIn = new Date(Date.now() - 7 * 24 * HOUR + 60_000);
		const created = await session.createSession(id, signedIn);
		// kept in use all week: the sliding expiry is still hours away
		await getDb()
			.update(sessions)
			.set({ expiresAt: new Date(Date.now() + 11 * HOUR) })
			.where(eq(sessions.id, created.sessionId));
		expect(await session.validateSessionToken(created.token)).not.toBeNull();
		expect(await session.validateSessionToken(created.token, new Date(Date.now() + 2 * 60_000))).toBeNull();
		expect(await sessionRow(created.sessionId)).toBeUndefined();
	});

	it('never slides past the absolute end', async () => {
		const id = await makeUser('capped@larkspur.test');
		const now = new Date();
		const created = await session.createSession(id, new Date(now.getTime() - 7 * 24 * HOUR + 3 * HOUR));
		await getDb()
			.update(sessions)
			.set({ expiresAt: new Date(now.getTime() + HOUR) })
			.where(eq(sessions.id, created.sessionId));
		const validated = await session.validateSessionToken(created.token, now);
		expect(validated?.session.fresh).toBe(true);
		expect(validated!.session.expiresAt.getTime()).toBe(now.getTime() + 3 * HOUR);
		expect((await sessionRow(created.sessionId)).expiresAt.getTime()).toBe(now.getTime() + 3 * HOUR);
		// at the cap it is not extended again
		const again = await session.validateSessionToken(created.token, new Date(now.getTime() + 2 * HOUR));
		expect(again?.session.fresh).toBe(false);
	});

	it('takes the absolute lifetime from EBBLINE_SESSION_ABSOLUTE_H, and refuses a malformed one naming it', async () => {
		const id = await makeUser('short-life@larkspur.test');
		process.env.EBBLINE_SESSION_ABSOLUTE_H = '2';
		const now = new Date();
		const created = await session.createSession(id, new Date(now.getTime() - HOUR));
		expect((await sessionRow(created.sessionId)).expiresAt.getTime()).toBe(now.getTime() + HOUR);
		expect(await session.validateSessionToken(created.token, now)).not.toBeNull();
		expect(await session.validateSessionToken(created.token, new Date(now.getTime() + HOUR + 1))).toBeNull();
		process.env.EBBLINE_SESSION_ABSOLUTE_H = 'a week';
		expect(() => session.absoluteLifetimeMs()).toThrow(/EBBLINE_SESSION_ABSOLUTE_H/);
		process.env.EBBLINE_SESSION_ABSOLUTE_H = '0';
		expect(() => session.absoluteLifetimeMs()).toThrow(/EBBLINE_SESSION_ABSOLUTE_H=0 must be between 1 and 2160/);
	});

	it('the cleanup job removes sessions past either limit and keeps live ones', async () => {
		const id = await makeUser('cleanup@larkspur.test');
		const live = await session.createSession(id);
		const slid = await session.createSession(id);
		await getDb()
			.update(sessions)
			.set({ expiresAt: new Date(Date.now() - 1000) })
			.where(eq(sessions.id, slid.sessionId));
		const old = await session.createSession(id, new Date(Date.now() - 8 * 24 * HOUR));
		await getDb()
			.update(sessions)
			.set({ expiresAt: new Date(Date.now() + HOUR) })
			.where(eq(sessions.id, old.sessionId));
		const result = (await sessionCleanup.handler([], {} as never)) as { removed: number };
		expect(result.removed).toBeGreaterThanOrEqual(2);
		expect(await sessionRow(slid.sessionId)).toBeUndefined();
		expect(await sessionRow(old.sessionId)).toBeUndefined();
		expect(await sessionRow(live.sessionId)).toBeDefined();
	});

	it('signing out ends that session only', async () => {
		const id = await makeUser('two-devices@larkspur.test');
		const a = await session.createSession(id);
		const b = await session.createSession(id);
		await userService.signOut(a.sessionId, { actorId: id, actorLabel: 'two-devices@larkspur.test', requestId: null });
		expect(await session.validateSessionToken(a.token)).toBeNull();
		expect((await session.validateSessionToken(b.token))?.user.id).toBe(id);
		expect(await auditActions('two-devices@larkspur.test')).toContain('auth.sign_out');
	});

	it('a role change or a password reset ends every session of that user', async () => {
		const id = await makeUser('moved@larkspur.test');
		const a = await session.createSession(id);
		await userService.update(id, { role: 'physician' }, system);
		expect(await session.validateSessionToken(a.token)).toBeNull();
		const b = await session.createSession(id);
		await userService.resetPassword(id, 'another long password', system);
		expect(await session.validateSessionToken(b.token)).toBeNull();
	});

	it('a token that was never issued finds nothing', async () => {
		expect(await session.validateSessionToken('planted-by-an-attacker')).toBeNull();
		expect(await session.validateSessionToken('')).toBeNull();
	});

	it('names the cookie with the __Host- prefix over https only', () => {
		expect(session.sessionCookieName(new URL('https://ebbline.hospital.example/board'))).toBe('__Host-ebbline_session');
		expect(session.sessionCookieName(new URL('http://127.0.0.1:3000/board'))).toBe('ebbline_session');
	});
});

describe('password hashes', () => {
	it('hashes with argon2id at 64 MiB, 3 passes, 4 lanes', async () => {
		const stored = await hashPassword('some long password');
		expect(stored).toMatch(/^\$argon2id\$v=19\$m=65536,t=3,p=4\$/);
		expect(needsRehash(stored)).toBe(false);
	});

	it('rehashes a hash made with the earlier parameters at the next successful sign-in only', async () => {
		const id = await makeUser('old-hash@larkspur.test');
		const older = await hash(PASSWORD, { memoryCost: 19456, timeCost: 2, parallelism: 1, outputLen: 32 });
		expect(needsRehash(older)).toBe(true);
		await getDb().update(users).set({ passwordHash: older }).where(eq(users.id, id));
		const readHash = async () => (await getDb().select({ hash: users.passwordHash }).from(users).where(eq(users.id, id)))[0].hash;

		expect((await userService.signIn('old-hash@larkspur.test', 'not the password', '10.40.0.1', null)).ok).toBe(false);
		expect(await readHash()).toBe(older);

		expect((await userService.signIn('old-hash@larkspur.test', PASSWORD, '10.40.0.1', null)).ok).toBe(true);
		const renewed = await readHash();
		expect(renewed).not.toBe(older);
		expect(renewed).toMatch(/^\$argon2id\$v=19\$m=65536,t=3,p=4\$/);
		expect(await verifyPassword(renewed, PASSWORD)).toBe(true);
		expect(await auditActions('old-hash@larkspur.test')).toContain('auth.password_rehashed');

		// the new hash still signs in, and is not rewritten again
		expect((await userService.signIn('old-hash@larkspur.test', PASSWORD, '10.40.0.1', null)).ok).toBe(true);
		expect(await readHash()).toBe(renewed);
	}, 30_000);

	it("asks for a rehash of anything that is not today's argon2id", () => {
		expect(needsRehash('$argon2i$v=19$m=65536,t=3,p=4$c2FsdHNhbHQ$aGFzaA')).toBe(true);
		expect(needsRehash('$argon2id$v=19$m=65536,t=2,p=4$c2FsdHNhbHQ$aGFzaA')).toBe(true);
		expect(needsRehash('$argon2id$v=19$m=65536,t=3,p=1$c2FsdHNhbHQ$aGFzaA')).toBe(true);
		expect(needsRehash('$2b$10$abcdefghijklmnopqrstuv')).toBe(true);
		expect(needsRehash('$argon2id$v=19$m=131072,t=4,p=4$c2FsdHNhbHQ$aGFzaA')).toBe(false);
	});
});
