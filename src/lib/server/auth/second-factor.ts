import { and, count, eq, gt, isNotNull, isNull, lt, or } from 'drizzle-orm';
import { toString as qrSvg } from 'qrcode';
import type { Actor } from '../../domain/actor';
import * as audit from '../audit';
import { getDb, type DbOrTx } from '../db';
import { recoveryCodes, sessions, signInChallenges, userTotp, type Role } from '../db/schema';
import { hashRecoveryCode, newRecoveryCode, normaliseRecoveryCode, RECOVERY_CODE_COUNT } from './recovery-codes';
import { hashToken, randomToken } from './tokens';
import { ConfigError } from '../config';
import { decryptSecret, encryptSecret, totpKey } from './totp-key';
import { keyUri, matchingStep, newTotpSecret, normaliseTotpCode, secretText } from './totp';

/**
 * The second sign-in factor: enrolment, verification (a TOTP code or a recovery code), recovery codes,
 * switching off and an administrator's reset. Every change is audited.
 */

/** EBBLINE_ADMIN_TOTP=optional (set by `npm start` and the tests, refused by `npm run serve`) lets administrators sign in without one. */
export function adminTotpRequired(): boolean {
	return process.env.EBBLINE_ADMIN_TOTP !== 'optional';
}

/** Stops the start on a malformed EBBLINE_ADMIN_TOTP or EBBLINE_TOTP_KEY (a missing key is named where it is first needed). */
export function checkConfiguration() {
	const mode = process.env.EBBLINE_ADMIN_TOTP;
	if (mode !== undefined && mode !== '' && mode !== 'required' && mode !== 'optional') {
		throw new ConfigError(`Invalid configuration: EBBLINE_ADMIN_TOTP=${mode} must be required (the default) or optional.`);
	}
	if (process.env.EBBLINE_TOTP_KEY) totpKey();
}

export function isRequiredFor(role: Role): boolean {
	return role === 'admin' && adminTotpRequired();
}

export type FactorStatus = { enrolled: boolean; enrolledAt: Date | null; pending: boolean; recoveryCodesLeft: number };

export async function status(userId: string): Promise<FactorStatus> {
	const db = getDb();
	const [row] = await db.select({ enrolledAt: userTotp.enrolledAt }).from(userTotp).where(eq(userTotp.userId, userId));
	const [left] = await db
		.select({ n: count() })
		.from(recoveryCodes)
		.where(and(eq(recoveryCodes.userId, userId), isNull(recoveryCodes.usedAt)));
	return { enrolled: Boolean(row?.enrolledAt), enrolledAt: row?.enrolledAt ?? null, pending: Boolean(row && !row.enrolledAt), recoveryCodesLeft: left?.n ?? 0 };
}

export async function isEnrolled(userId: string): Promise<boolean> {
	const [row] = await getDb()
		.select({ userId: userTotp.userId })
		.from(userTotp)
		.where(and(eq(userTotp.userId, userId), isNotNull(userTotp.enrolledAt)));
	return Boolean(row);
}

/** Starts (or restarts) an enrolment with a new secret; refused (false) while one is enrolled. */
export async function begin(userId: string, who: Actor): Promise<boolean> {
	const secretEncrypted = encryptSecret(newTotpSecret(), userId);
	const rows = await getDb()
		.insert(userTotp)
		.values({ userId, secretEncrypted })
		.onConflictDoUpdate({ target: userTotp.userId, set: { secretEncrypted, lastStep: null, createdAt: new Date() }, where: isNull(userTotp.enrolledAt) })
		.returning({ userId: userTotp.userId });
	if (rows.length === 0) return false;
	await audit.record({ ...who, action: 'user.second_factor_enrolment_started', objectType: 'user', objectId: userId });
	return true;
}

/** What the enrolment page shows while an enrolment waits for its first code. */
export async function pendingSetup(userId: string, accountName: string) {
	const [row] = await getDb()
		.select({ secretEncrypted: userTotp.secretEncrypted })
		.from(userTotp)
		.where(and(eq(userTotp.userId, userId), isNull(userTotp.enrolledAt)));
	if (!row) return null;
	const secret = decryptSecret(row.secretEncrypted, userId);
	const uri = keyUri(secret, accountName);
	return {
		secret: secretText(secret)
			.match(/.{1,4}/g)!
			.join(' '),
		uri,
		qrSvg: await qrSvg(uri, { type: 'svg', margin: 1, errorCorrectionLevel: 'M' })
	};
}

async function replaceRecoveryCodes(userId: string, db: DbOrTx): Promise<string[]> {
	const codes = Array.from({ length: RECOVERY_CODE_COUNT }, newRecoveryCode);
	await db.delete(recoveryCodes).where(eq(recoveryCodes.userId, userId));
	await db.insert(recoveryCodes).values(codes.map((code) => ({ userId, codeHash: hashRecoveryCode(normaliseRecoveryCode(code)!) })));
	return codes;
}

/** Confirms a pending enrolment with a code from the app; returns the recovery codes (shown once) or null for a wrong code. */
export async function confirm(userId: string, input: string, who: Actor, now = new Date()): Promise<string[] | null> {
	const code = normaliseTotpCode(input);
	if (!code) return null;
	const db = getDb();
	const [row] = await db
		.select({ secretEncrypted: userTotp.secretEncrypted })
		.from(userTotp)
		.where(and(eq(userTotp.userId, userId), isNull(userTotp.enrolledAt)));
	if (!row) return null;
	const step = matchingStep(decryptSecret(row.secretEncrypted, userId), code, now.getTime(), null);
	if (step === null) return null;
	return db.transaction(async (tx) => {
		const done = await tx
			.update(userTotp)
			.set({ enrolledAt: now, lastStep: step })
			.where(and(eq(userTotp.userId, userId), isNull(userTotp.enrolledAt)))
			.returning({ userId: userTotp.userId });
		if (done.length === 0) return null;
		const codes = await replaceRecoveryCodes(userId, tx);
		await audit.record({ ...who, action: 'user.second_factor_enrolled', objectType: 'user', objectId: userId }, tx);
		return codes;
	});
}

export async function regenerateRecoveryCodes(userId: string, who: Actor): Promise<string[] | null> {
	if (!(await isEnrolled(userId))) return null;
	return getDb().transaction(async (tx) => {
		const codes = await replaceRecoveryCodes(userId, tx);
		await audit.record({ ...who, action: 'user.recovery_codes_regenerated', objectType: 'user', objectId: userId }, tx);
		return codes;
	});
}

export type Verified = 'totp' | 'recovery' | null;

/**
 * Checks a 6-digit code or a recovery code for an enrolled user and, when right, spends it in one
 * statement: the time step is recorded (a code is refused the second time, also by a parallel
 * request) or the recovery code is marked used.
 */
export async function verify(userId: string, input: string, now = new Date()): Promise<Verified> {
	const db = getDb();
	const totp = normaliseTotpCode(input);
	if (totp) {
		const [row] = await db
			.select({ secretEncrypted: userTotp.secretEncrypted, lastStep: userTotp.lastStep })
			.from(userTotp)
			.where(and(eq(userTotp.userId, userId), isNotNull(userTotp.enrolledAt)));
		if (!row) return null;
		const step = matchingStep(decryptSecret(row.secretEncrypted, userId), totp, now.getTime(), row.lastStep);
		if (step === null) return null;
		const spent = await db
			.update(userTotp)
			.set({ lastStep: step })
			.where(and(eq(userTotp.userId, userId), or(isNull(userTotp.lastStep), lt(userTotp.lastStep, step))))
			.returning({ userId: userTotp.userId });
		return spent.length === 1 ? 'totp' : null;
	}
	const recovery = normaliseRecoveryCode(input);
	if (!recovery) return null;
	const used = await db
		.update(recoveryCodes)
		.set({ usedAt: now })
		.where(and(eq(recoveryCodes.userId, userId), eq(recoveryCodes.codeHash, hashRecoveryCode(recovery)), isNull(recoveryCodes.usedAt)))
		.returning({ id: recoveryCodes.id });
	return used.length === 1 ? 'recovery' : null;
}

async function removeFactor(userId: string, tx: DbOrTx) {
	await tx.delete(recoveryCodes).where(eq(recoveryCodes.userId, userId));
	const removed = await tx.delete(userTotp).where(eq(userTotp.userId, userId)).returning({ enrolledAt: userTotp.enrolledAt });
	return removed.length > 0;
}

/** The user switches their own second factor off (the caller checks the code and whether it is required). */
export async function disable(userId: string, who: Actor): Promise<boolean> {
	return getDb().transaction(async (tx) => {
		if (!(await removeFactor(userId, tx))) return false;
		await audit.record({ ...who, action: 'user.second_factor_disabled', objectType: 'user', objectId: userId }, tx);
		return true;
	});
}

/** An administrator removes another user's second factor (a lost phone): they enrol again, and are signed out. */
export async function reset(userId: string, who: Actor): Promise<boolean> {
	return getDb().transaction(async (tx) => {
		if (!(await removeFactor(userId, tx))) return false;
		await tx.delete(sessions).where(eq(sessions.userId, userId));
		await audit.record({ ...who, action: 'user.second_factor_reset', objectType: 'user', objectId: userId }, tx);
		return true;
	});
}

// The second step of a sign-in
export const CHALLENGE_MINUTES = 5;

export async function createChallenge(userId: string, now = new Date()) {
	const token = randomToken(32);
	const expiresAt = new Date(now.getTime() + CHALLENGE_MINUTES * 60_000);
	const db = getDb();
	// one open challenge per user; expired ones of anyone are swept on the way
	await db.delete(signInChallenges).where(or(eq(signInChallenges.userId, userId), lt(signInChallenges.expiresAt, now)));
	await db.insert(signInChallenges).values({ id: hashToken(token), userId, expiresAt });
	return { token, expiresAt };
}

/** The user a challenge token is for, while it is open; null when unknown, used or expired. */
export async function challengeUser(token: string, now = new Date()): Promise<string | null> {
	const [row] = await getDb()
		.select({ userId: signInChallenges.userId })
		.from(signInChallenges)
		.where(and(eq(signInChallenges.id, hashToken(token)), gt(signInChallenges.expiresAt, now)));
	return row?.userId ?? null;
}

/** Ends a challenge; true only for the one caller that ended an open one (single use). */
export async function endChallenge(token: string, now = new Date()): Promise<boolean> {
	const ended = await getDb()
		.delete(signInChallenges)
		.where(and(eq(signInChallenges.id, hashToken(token)), gt(signInChallenges.expiresAt, now)))
		.returning({ id: signInChallenges.id });
	return ended.length === 1;
}

/** Removes expired challenges; returns how many. */
export async function removeExpiredChallenges(now = new Date()): Promise<number> {
	const removed = await getDb().delete(signInChallenges).where(lt(signInChallenges.expiresAt, now)).returning({ id: signInChallenges.id });
	return removed.length;
}
