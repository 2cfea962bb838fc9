import { and, eq, like } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../src/lib/server/db';
import { auditLog, sessions, users } from '../../../src/lib/server/db/schema';
import * as session from '../../../src/lib/server/session';
import * as throttle from '../../../src/lib/server/throttle';
import { hashToken } from '../../../src/lib/server/tokens';
import * as userService from '../../../src/lib/server/users';

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
		const [stored] = await getDb().select().from(sessions).where(eq(sessions.id, hashToken(result.token)));
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

	it('locks an address that tries many accounts', async () => {
		// the first failures recorded directly (signIn would sleep through its slow-down each time)
		for (let i = 0; i < throttle.MAX_ADDRESS_FAILURES - 1; i++) await throttle.fail('ip:10.9.9.9');
		const last = await userService.signIn('spray@larkspur.test', 'bad', '10.9.9.9', null);
		expect(last).toMatchObject({ ok: false, reason: 'locked' });
		await makeUser('innocent@larkspur.test');
		const result = await userService.signIn('innocent@larkspur.test', PASSWORD, '10.9.9.9', null);
		expect(result).toMatchObject({ ok: false, reason: 'locked' });
	}, 120_000);

	it('refuses a deactivated user and ends their sessions', async () => {
		const id = await makeUser('leaver@larkspur.test');
		const first = await userService.signIn('leaver@larkspur.test', PASSWORD, '10.0.0.5', null);
		expect(first.ok).toBe(true);
		await userService.update(id, { active: false }, system);
		if (first.ok) expect(await session.validateSessionToken(first.token)).toBeNull();
		const again = await userService.signIn('leaver@larkspur.test', PASSWORD, '10.0.0.5', null);
		expect(again).toEqual({ ok: false, reason: 'deactivated' });
		const rows = await getDb().select({ action: auditLog.action }).from(auditLog).where(and(eq(auditLog.objectId, id), eq(auditLog.action, 'user.deactivated')));
		expect(rows).toHaveLength(1);
	});

	it('does not accept an expired session', async () => {
		const id = await makeUser('expired@larkspur.test');
		const created = await session.createSession(id);
		await getDb().update(sessions).set({ expiresAt: new Date(Date.now() - 1000) }).where(eq(sessions.id, created.sessionId));
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
		const rows = await getDb().select().from(auditLog).where(and(eq(auditLog.objectId, id), like(auditLog.action, 'user.role%')));
		expect(rows).toHaveLength(1);
		expect(rows[0].before).toEqual({ role: 'pharmacist' });
		expect(rows[0].after).toEqual({ role: 'admin' });
	});

	it('never stores a password in clear', async () => {
		const [row] = await getDb().select({ hash: users.passwordHash }).from(users).where(eq(users.email, 'ok@larkspur.test'));
		expect(row.hash.startsWith('$argon2id$')).toBe(true);
	});
});
