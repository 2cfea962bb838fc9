import { decodeBase32IgnorePadding } from '@oslojs/encoding';
import { generateHOTP } from '@oslojs/otp';
import { randomBytes } from 'node:crypto';
import { eq } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { auditLog, recoveryCodes, sessions, signInChallenges, userTotp } from '../../../../src/lib/server/db/schema';
import { hashToken, secondFactor, sessions as session, throttle, users as userService } from '../../../../src/lib/server/auth';
import { stepAt } from '../../../../src/lib/server/auth/totp';
import { actions as securityPage } from '../../../../src/routes/account/security/+page.server';

const PASSWORD = 'correct horse battery';
const system = { actorId: null, actorLabel: 'test', requestId: null };
let n = 0;

beforeAll(() => {
	process.env.EBBLINE_TOTP_KEY ??= randomBytes(32).toString('base64');
});

/** Waits, if needed, until at least 12 s of the current 30 s step remain, so a test's codes do not straddle a step change. */
async function awayFromStepEdge() {
	const intoStepMs = Date.now() % 30_000;
	if (intoStepMs > 18_000) await new Promise((resolve) => setTimeout(resolve, 30_000 - intoStepMs + 100));
}

async function auditActions(userId: string) {
	const rows = await getDb()
		.select({ action: auditLog.action, after: auditLog.after })
		.from(auditLog)
		.where(eq(auditLog.objectId, userId))
		.orderBy(auditLog.id);
	return rows;
}

/** A user with a confirmed second factor: returns the secret (read from the set-up page's text, as a person types it) and the recovery codes. */
async function enrolledUser(role: 'pharmacist' | 'admin' = 'pharmacist') {
	const email = `factor${++n}-${Date.now()}@larkspur.test`;
	const { id } = await userService.create({ email, displayName: 'Factor Person', role, password: PASSWORD }, system);
	const who = { actorId: id, actorLabel: email, requestId: null };
	expect(await secondFactor.begin(id, who)).toBe(true);
	const setup = await secondFactor.pendingSetup(id, email);
	const secret = decodeBase32IgnorePadding(setup!.secret.replaceAll(' ', ''));
	await awayFromStepEdge();
	const step = stepAt(Date.now());
	const codes = await secondFactor.confirm(id, generateHOTP(secret, BigInt(step - 1), 6), who);
	expect(codes).toHaveLength(10);
	return { id, email, secret, recoveryCodes: codes!, who, code: (s: number) => generateHOTP(secret, BigInt(s), 6) };
}

async function passwordStep(email: string, address = '10.20.0.1') {
	const result = await userService.signIn(email, PASSWORD, address, null);
	if (result.ok || result.reason !== 'second_factor') throw new Error(`expected a second step, got ${JSON.stringify(result)}`);
	return result.challenge.token;
}

describe('second factor enrolment', () => {
	it('keeps the secret encrypted, shows a URI and QR code while pending, and refuses a wrong first code', async () => {
		const email = `pending-${Date.now()}@larkspur.test`;
		const { id } = await userService.create({ email, displayName: 'Pending Person', role: 'physician', password: PASSWORD }, system);
		const who = { actorId: id, actorLabel: email, requestId: null };
		await secondFactor.begin(id, who);
		const setup = await secondFactor.pendingSetup(id, email);
		expect(setup!.uri).toContain('otpauth://totp/Ebbline:');
		expect(setup!.qrSvg).toMatch(/^<svg/);
		const [row] = await getDb().select().from(userTotp).where(eq(userTotp.userId, id));
		expect(row.secretEncrypted).toMatch(/^v1\./);
		expect(row.secretEncrypted).not.toContain(setup!.secret.replaceAll(' ', ''));
		expect(row.enrolledAt).toBeNull();
		expect(await secondFactor.confirm(id, '000000', who)).toBeNull();
		expect((await secondFactor.status(id)).enrolled).toBe(false);
		// not enrolled yet: the password alone still signs in
		expect((await userService.signIn(email, PASSWORD, '10.20.9.9', null)).ok).toBe(true);
	});

	it('stores only hashes of the ten recovery codes, and audits the enrolment', async () => {
		const user = await enrolledUser();
		const rows = await getDb().select().from(recoveryCodes).where(eq(recoveryCodes.userId, user.id));
		expect(rows).toHaveLength(10);
		for (const code of user.recoveryCodes) {
			expect(rows.some((r) => r.codeHash === hashToken(code.replaceAll('-', '')))).toBe(true);
			expect(rows.some((r) => r.codeHash.includes(code.replaceAll('-', '')))).toBe(false);
		}
		expect((await auditActions(user.id)).map((r) => r.action)).toEqual(
			expect.arrayContaining(['user.created', 'user.second_factor_enrolment_started', 'user.second_factor_enrolled'])
		);
		expect(await secondFactor.begin(user.id, user.who)).toBe(false); // enrolled: no new secret over it
	});
});

describe('signing in with a second factor', () => {
	it('asks for a code after the password, creates no session until it, then signs in once with it', async () => {
		const user = await enrolledUser();
		const token = await passwordStep(user.email);
		expect(await getDb().select().from(sessions).where(eq(sessions.userId, user.id))).toHaveLength(0);
		const [challenge] = await getDb().select().from(signInChallenges).where(eq(signInChallenges.userId, user.id));
		expect(challenge.id).toBe(hashToken(token)); // the cookie's token is stored only as its hash
		const done = await userService.completeSecondFactor(token, user.code(stepAt(Date.now())), '10.20.0.1', null);
		expect(done.ok).toBe(true);
		if (!done.ok) return;
		expect((await session.validateSessionToken(done.token))?.user).toMatchObject({ email: user.email, secondFactor: true });
		// the challenge was single-use
		expect(await userService.completeSecondFactor(token, user.code(stepAt(Date.now()) + 1), '10.20.0.1', null)).toEqual({ ok: false, reason: 'expired' });
		const signIn = (await auditActions(user.id)).find((r) => r.action === 'auth.sign_in');
		expect(signIn?.after).toMatchObject({ secondFactor: 'totp' });
	});

	it('refuses a code already used (replay), even on a new challenge', async () => {
		const user = await enrolledUser();
		const code = user.code(stepAt(Date.now()));
		expect((await userService.completeSecondFactor(await passwordStep(user.email), code, '10.20.0.2', null)).ok).toBe(true);
		expect(await userService.completeSecondFactor(await passwordStep(user.email), code, '10.20.0.2', null)).toEqual({ ok: false, reason: 'wrong_code' });
		// and the step used at enrolment is spent too
		expect(await userService.completeSecondFactor(await passwordStep(user.email), user.code(stepAt(Date.now()) - 1), '10.20.0.2', null)).toEqual({
			ok: false,
			reason: 'wrong_code'
		});
	});

	it('lets exactly one of two parallel requests with the same challenge and right code in', async () => {
		const user = await enrolledUser();
		const token = await passwordStep(user.email, '10.20.1.1');
		const code = user.code(stepAt(Date.now()));
		const results = await Promise.all([1, 2].map(() => userService.completeSecondFactor(token, code, '10.20.1.1', null)));
		expect(results.filter((r) => r.ok)).toHaveLength(1);
		expect(await getDb().select().from(sessions).where(eq(sessions.userId, user.id))).toHaveLength(1);
	});

	it('takes a recovery code once, typed in any case and spacing', async () => {
		const user = await enrolledUser();
		const typed = user.recoveryCodes[3].toLowerCase().replaceAll('-', ' ');
		expect(await userService.completeSecondFactor(await passwordStep(user.email), typed, '10.20.2.1', null)).toMatchObject({ ok: true });
		expect(await userService.completeSecondFactor(await passwordStep(user.email), user.recoveryCodes[3], '10.20.2.1', null)).toEqual({
			ok: false,
			reason: 'wrong_code'
		});
		expect((await secondFactor.status(user.id)).recoveryCodesLeft).toBe(9);
		expect((await auditActions(user.id)).map((r) => r.action)).toContain('auth.recovery_code_used');
	});

	it('ends a challenge after five minutes', async () => {
		const user = await enrolledUser();
		const old = await secondFactor.createChallenge(user.id, new Date(Date.now() - 5 * 60_000 - 1000));
		expect(await secondFactor.challengeUser(old.token)).toBeNull();
		expect(await userService.completeSecondFactor(old.token, user.code(stepAt(Date.now())), '10.20.3.1', null)).toEqual({ ok: false, reason: 'expired' });
		expect(await secondFactor.removeExpiredChallenges()).toBeGreaterThanOrEqual(1);
		const fresh = await secondFactor.createChallenge(user.id, new Date(Date.now() - 4 * 60_000));
		expect(await secondFactor.challengeUser(fresh.token)).toBe(user.id);
	});

	it('counts wrong codes with wrong passwords for the account lock-out; the password alone does not reset the count', async () => {
		const user = await enrolledUser();
		const key = `email:${user.email}`;
		// two wrong codes, the password again, two more: the count carries on
		let token = await passwordStep(user.email, '10.20.4.1');
		for (let i = 0; i < 2; i++) expect(await userService.completeSecondFactor(token, '000000', '10.20.4.1', null)).toMatchObject({ reason: 'wrong_code' });
		token = await passwordStep(user.email, '10.20.4.1');
		for (let i = 0; i < 2; i++)
			expect(await userService.completeSecondFactor(token, 'AAAA-BBBB-CCCC-DDDD', '10.20.4.1', null)).toMatchObject({ reason: 'wrong_code' });
		expect((await throttle.check(key)).failures).toBe(4);
		const fifth = await userService.completeSecondFactor(token, '999999', '10.20.4.1', null);
		expect(fifth).toMatchObject({ ok: false, reason: 'locked' });
		// the lock ended the challenge, and refuses the right password
		expect(await secondFactor.challengeUser(token)).toBeNull();
		expect(await userService.signIn(user.email, PASSWORD, '10.20.4.2', null)).toMatchObject({ ok: false, reason: 'locked' });
		const actions = (await auditActions(user.id)).map((r) => r.action);
		expect(actions.filter((a) => a === 'auth.second_factor_failed')).toHaveLength(5);
		expect(actions).toContain('auth.locked_out');
	}, 60_000);
});

describe('changing a second factor', () => {
	it('regenerates recovery codes (the old ones stop working) and switches off, audited', async () => {
		const user = await enrolledUser();
		const fresh = await secondFactor.regenerateRecoveryCodes(user.id, user.who);
		expect(fresh).toHaveLength(10);
		expect(await userService.completeSecondFactor(await passwordStep(user.email), user.recoveryCodes[0], '10.20.5.1', null)).toMatchObject({
			reason: 'wrong_code'
		});
		expect(await userService.completeSecondFactor(await passwordStep(user.email), fresh![0], '10.20.5.1', null)).toMatchObject({ ok: true });
		expect(await secondFactor.disable(user.id, user.who)).toBe(true);
		expect(await getDb().select().from(recoveryCodes).where(eq(recoveryCodes.userId, user.id))).toHaveLength(0);
		expect((await userService.signIn(user.email, PASSWORD, '10.20.5.2', null)).ok).toBe(true);
		expect((await auditActions(user.id)).map((r) => r.action)).toEqual(
			expect.arrayContaining(['user.recovery_codes_regenerated', 'user.second_factor_disabled'])
		);
	});

	it('the security page makes new recovery codes only with a current code, named in its own field', async () => {
		const user = await enrolledUser();
		const locals = { user: { id: user.id, email: user.email, displayName: 'Factor Person', role: 'pharmacist' }, sessionId: null, requestId: 'req-regen' };
		const post = (fields: Record<string, string>) =>
			// eslint-disable-next-line @typescript-eslint/no-explicit-any
			(securityPage.regenerate as any)({
				locals,
				request: new Request('http://ebbline.test/account/security?/regenerate', { method: 'POST', body: new URLSearchParams(fields) })
			});
		expect(await post({})).toMatchObject({ status: 400, data: { errors: { regenerateCode: expect.stringContaining('Enter the 6-digit code') } } });
		expect(await post({ regenerateCode: '000000' === user.code(stepAt(Date.now())) ? '111111' : '000000' })).toMatchObject({
			status: 400,
			data: { errors: { regenerateCode: expect.stringContaining('not right') } }
		});
		const leftBefore = (await secondFactor.status(user.id)).recoveryCodesLeft;
		expect(leftBefore).toBe(10);
		// a recovery code is spent by it and answers with ten new ones; the old ones stop working
		const made = (await post({ regenerateCode: user.recoveryCodes[1] })) as { recoveryCodes: string[] };
		expect(made.recoveryCodes).toHaveLength(10);
		expect(await userService.completeSecondFactor(await passwordStep(user.email), user.recoveryCodes[2], '10.20.5.9', null)).toMatchObject({
			reason: 'wrong_code'
		});
	});

	it('an administrator’s reset removes it, ends the user’s sessions and is audited with the administrator as actor', async () => {
		const user = await enrolledUser();
		const done = await userService.completeSecondFactor(await passwordStep(user.email), user.code(stepAt(Date.now())), '10.20.6.1', null);
		expect(done.ok).toBe(true);
		const admin = { actorId: null, actorLabel: 'lead@larkspur.test', requestId: 'req-reset' };
		expect(await secondFactor.reset(user.id, admin)).toBe(true);
		expect(await getDb().select().from(sessions).where(eq(sessions.userId, user.id))).toHaveLength(0);
		expect(await secondFactor.status(user.id)).toMatchObject({ enrolled: false, pending: false, recoveryCodesLeft: 0 });
		const [row] = await getDb().select().from(auditLog).where(eq(auditLog.requestId, 'req-reset'));
		expect(row).toMatchObject({ action: 'user.second_factor_reset', actorLabel: 'lead@larkspur.test', objectId: user.id });
		expect(await secondFactor.reset(user.id, admin)).toBe(false);
	});

	it('is required of administrators unless EBBLINE_ADMIN_TOTP=optional', () => {
		const before = process.env.EBBLINE_ADMIN_TOTP;
		try {
			delete process.env.EBBLINE_ADMIN_TOTP;
			expect(secondFactor.isRequiredFor('admin')).toBe(true);
			expect(secondFactor.isRequiredFor('pharmacist')).toBe(false);
			process.env.EBBLINE_ADMIN_TOTP = 'optional';
			expect(secondFactor.isRequiredFor('admin')).toBe(false);
			process.env.EBBLINE_ADMIN_TOTP = 'sometimes';
			expect(() => secondFactor.checkConfiguration()).toThrow(/EBBLINE_ADMIN_TOTP=sometimes/);
		} finally {
			if (before === undefined) delete process.env.EBBLINE_ADMIN_TOTP;
			else process.env.EBBLINE_ADMIN_TOTP = before;
		}
	});
});
