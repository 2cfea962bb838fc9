import type { Actor } from '../../domain/actor';
import { asc, eq, sql } from 'drizzle-orm';
import * as audit from '../audit';
import { getDb, type DbOrTx } from '../db';
import { recommendations, users, userTotp, type Role } from '../db/schema';
import { hashPassword, needsRehash, verifyPassword } from './password';
import { prescribers } from '../prescribers';
import * as secondFactor from './second-factor';
import * as session from './session';
import * as throttle from './throttle';

export type { Actor };

// A real argon2id hash of a random string: verifying against it when the e-mail is unknown keeps
// the response time the same, so timing does not reveal which addresses have accounts.
let dummyHash: Promise<string> | undefined;

export type SignInResult =
	| { ok: true; token: string; expiresAt: Date; user: { id: string; role: Role } }
	| { ok: false; reason: 'invalid' | 'locked' | 'address_locked' | 'deactivated'; lockedUntil?: Date }
	/** the password was right and the account has a second factor: no session until its code (the challenge's token, for a cookie) */
	| { ok: false; reason: 'second_factor'; challenge: { token: string; expiresAt: Date } };

const sleep = (ms: number) => new Promise((resolve) => setTimeout(resolve, ms));

/**
 * Two throttles: one per account, which refuses even the right password while locked, and one per
 * client address, which counts failures only. A locked address still lets the right password for an
 * active account in (a ward behind one proxy shares an address) and a success there does not clear
 * it (or one colleague's sign-in would wipe an attacker's count).
 */
export async function signIn(email: string, password: string, address: string, requestId: string | null): Promise<SignInResult> {
	const normalised = email.trim().toLowerCase();
	const accountKey = `email:${normalised}`;
	const addressKey = `ip:${address}`;
	const [account, place] = await Promise.all([throttle.check(accountKey), throttle.check(addressKey)]);
	if (account.locked) {
		await audit.record({ actorLabel: normalised, action: 'auth.sign_in_refused_locked', objectType: 'user', objectId: null, after: { address }, requestId });
		return { ok: false, reason: 'locked', lockedUntil: account.lockedUntil ?? undefined };
	}
	await sleep(Math.max(account.delayMs, place.delayMs));

	const [user] = await getDb().select().from(users).where(eq(users.email, normalised));
	dummyHash ??= hashPassword(crypto.randomUUID());
	const valid = await verifyPassword(user?.passwordHash ?? (await dummyHash), password);

	if (!user || !valid) {
		const [accountCount, addressCount] = await Promise.all([throttle.fail(accountKey), throttle.fail(addressKey)]);
		await audit.record({
			actorId: user?.id ?? null,
			actorLabel: normalised,
			action: 'auth.sign_in_failed',
			objectType: 'user',
			objectId: user?.id ?? null,
			after: { address },
			requestId
		});
		for (const [scope, count] of [
			['account', accountCount],
			['address', addressCount]
		] as const) {
			if (!count.lockedNow) continue;
			await audit.record({
				actorId: user?.id ?? null,
				actorLabel: normalised,
				action: 'auth.locked_out',
				objectType: 'user',
				objectId: user?.id ?? null,
				after: { address, scope, minutes: throttle.LOCK_MINUTES },
				requestId
			});
		}
		if (accountCount.lockedUntil) return { ok: false, reason: 'locked', lockedUntil: accountCount.lockedUntil };
		if (addressCount.lockedUntil) return { ok: false, reason: 'address_locked', lockedUntil: addressCount.lockedUntil };
		return { ok: false, reason: 'invalid' };
	}
	if (!user.active) {
		await audit.record({
			actorId: user.id,
			actorLabel: normalised,
			action: 'auth.sign_in_refused_deactivated',
			objectType: 'user',
			objectId: user.id,
			requestId
		});
		return { ok: false, reason: 'deactivated' };
	}
	if (await secondFactor.isEnrolled(user.id)) {
		// the account's failure count stays until the second step succeeds: wrong codes add to it
		const challenge = await secondFactor.createChallenge(user.id);
		await audit.record({
			actorId: user.id,
			actorLabel: normalised,
			action: 'auth.password_accepted',
			objectType: 'user',
			objectId: user.id,
			after: { address, secondFactor: 'asked' },
			requestId
		});
		await rehashIfNeeded(user, password, normalised, requestId);
		return { ok: false, reason: 'second_factor', challenge };
	}
	await throttle.clear(accountKey);
	await rehashIfNeeded(user, password, normalised, requestId);
	return startSession(user, normalised, address, requestId);
}

async function rehashIfNeeded(user: { id: string; passwordHash: string }, password: string, normalised: string, requestId: string | null) {
	if (needsRehash(user.passwordHash)) {
		// the password is at hand only now: store it again under today's argon2id parameters
		await getDb()
			.update(users)
			.set({ passwordHash: await hashPassword(password) })
			.where(eq(users.id, user.id));
		await audit.record({ actorId: user.id, actorLabel: normalised, action: 'auth.password_rehashed', objectType: 'user', objectId: user.id, requestId });
	}
}

async function startSession(
	user: { id: string; role: Role },
	normalised: string,
	address: string,
	requestId: string | null,
	secondFactorUsed: secondFactor.Verified = null
): Promise<SignInResult & { ok: true }> {
	const created = await session.createSession(user.id);
	await audit.record({
		actorId: user.id,
		actorLabel: normalised,
		action: 'auth.sign_in',
		objectType: 'user',
		objectId: user.id,
		after: secondFactorUsed ? { address, secondFactor: secondFactorUsed } : { address },
		requestId
	});
	return { ok: true, token: created.token, expiresAt: created.expiresAt, user: { id: user.id, role: user.role } };
}

export type SecondStepResult =
	| { ok: true; token: string; expiresAt: Date; user: { id: string; role: Role } }
	| { ok: false; reason: 'expired' | 'wrong_code' | 'locked' | 'deactivated'; lockedUntil?: Date };

/**
 * The second step: the challenge from the password step and a 6-digit code or a recovery code. A wrong
 * code counts against the account like a wrong password (the same lock-out); the lock ends the
 * challenge. A right code ends the challenge (single use) and only then starts the session.
 */
export async function completeSecondFactor(challengeToken: string, code: string, address: string, requestId: string | null): Promise<SecondStepResult> {
	const userId = await secondFactor.challengeUser(challengeToken);
	if (!userId) return { ok: false, reason: 'expired' };
	const [user] = await getDb().select({ id: users.id, email: users.email, role: users.role, active: users.active }).from(users).where(eq(users.id, userId));
	if (!user) return { ok: false, reason: 'expired' };
	const accountKey = `email:${user.email}`;
	const who = { actorId: user.id, actorLabel: user.email, objectType: 'user', objectId: user.id, requestId };
	const state = await throttle.check(accountKey);
	if (state.locked) {
		await secondFactor.endChallenge(challengeToken);
		await audit.record({ ...who, action: 'auth.sign_in_refused_locked', after: { address, step: 'second_factor' } });
		return { ok: false, reason: 'locked', lockedUntil: state.lockedUntil ?? undefined };
	}
	await sleep(state.delayMs);
	const verified = await secondFactor.verify(user.id, code);
	if (!verified) {
		const count = await throttle.fail(accountKey);
		await audit.record({ ...who, action: 'auth.second_factor_failed', after: { address } });
		if (count.lockedNow) await audit.record({ ...who, action: 'auth.locked_out', after: { address, scope: 'account', minutes: throttle.LOCK_MINUTES } });
		if (count.lockedUntil) {
			await secondFactor.endChallenge(challengeToken);
			return { ok: false, reason: 'locked', lockedUntil: count.lockedUntil };
		}
		return { ok: false, reason: 'wrong_code' };
	}
	// a parallel request that also had a right code may have ended it first: only one session
	if (!(await secondFactor.endChallenge(challengeToken))) return { ok: false, reason: 'expired' };
	if (!user.active) {
		await audit.record({ ...who, action: 'auth.sign_in_refused_deactivated' });
		return { ok: false, reason: 'deactivated' };
	}
	await throttle.clear(accountKey);
	if (verified === 'recovery') await audit.record({ ...who, action: 'auth.recovery_code_used', after: { address } });
	return startSession(user, user.email, address, requestId, verified);
}

export async function signOut(sessionId: string, who: Actor) {
	await session.invalidateSession(sessionId);
	await audit.record({ ...who, action: 'auth.sign_out', objectType: 'user', objectId: who.actorId });
}

/** What the admin page shows: never the password hash. */
export function list() {
	return getDb()
		.select({
			id: users.id,
			email: users.email,
			displayName: users.displayName,
			role: users.role,
			active: users.active,
			createdAt: users.createdAt,
			secondFactor: sql<boolean>`${userTotp.enrolledAt} is not null`
		})
		.from(users)
		.leftJoin(userTotp, eq(userTotp.userId, users.id))
		.orderBy(asc(users.displayName));
}

export function activePhysicians() {
	return getDb()
		.select({ id: users.id, email: users.email, displayName: users.displayName })
		.from(users)
		.where(sql`${users.role} = 'physician' and ${users.active}`)
		.orderBy(asc(users.displayName));
}

export class EmailTakenError extends Error {}

export async function create(input: { email: string; displayName: string; role: Role; password: string }, who: Actor) {
	const email = input.email.trim().toLowerCase();
	const passwordHash = await hashPassword(input.password);
	return getDb().transaction(async (tx) => {
		const [existing] = await tx.select({ id: users.id }).from(users).where(eq(users.email, email));
		if (existing) throw new EmailTakenError(`A user with the e-mail ${email} already exists.`);
		const [row] = await tx.insert(users).values({ email, displayName: input.displayName.trim(), role: input.role, passwordHash }).returning({ id: users.id });
		// a physician invited by an administrator takes over the prescriber entry with the same e-mail
		const linkedPrescribers = input.role === 'physician' ? await prescribers.linkAccountByEmail(tx, email) : 0;
		await audit.record(
			{
				...who,
				action: 'user.created',
				objectType: 'user',
				objectId: row.id,
				after: { email, displayName: input.displayName, role: input.role, linkedPrescribers }
			},
			tx
		);
		return row;
	});
}

export async function update(id: string, changes: { role?: Role; active?: boolean; displayName?: string }, who: Actor) {
	return getDb().transaction(async (tx) => {
		const [before] = await tx
			.select({ role: users.role, active: users.active, displayName: users.displayName, email: users.email })
			.from(users)
			.where(eq(users.id, id));
		if (!before) return null;
		await tx.update(users).set(changes).where(eq(users.id, id));
		const revokedLinks = changes.active === false && before.active ? await revokeAnswerLinks(tx, id, before.email) : 0;
		const after = { role: before.role, active: before.active, displayName: before.displayName, ...changes };
		if (changes.role !== undefined && changes.role !== before.role) {
			await audit.record(
				{ ...who, action: 'user.role_changed', objectType: 'user', objectId: id, before: { role: before.role }, after: { role: changes.role } },
				tx
			);
		}
		if (changes.active !== undefined && changes.active !== before.active) {
			await audit.record(
				{
					...who,
					action: changes.active ? 'user.reactivated' : 'user.deactivated',
					objectType: 'user',
					objectId: id,
					before: { active: before.active },
					after: { active: changes.active, ...(changes.active ? {} : { revokedAnswerLinks: revokedLinks }) }
				},
				tx
			);
		}
		if (changes.displayName !== undefined && changes.displayName !== before.displayName) {
			await audit.record(
				{
					...who,
					action: 'user.renamed',
					objectType: 'user',
					objectId: id,
					before: { displayName: before.displayName },
					after: { displayName: changes.displayName }
				},
				tx
			);
		}
		if (changes.active === false || (changes.role !== undefined && changes.role !== before.role)) {
			// A deactivated user or a changed role must sign in again.
			await session.invalidateUserSessions(id);
		}
		return after;
	});
}

/**
 * A deactivated physician's open answer links stop working at once, for good (reactivating the account
 * does not bring them back): those sent to the account and those sent to its address before it existed.
 */
async function revokeAnswerLinks(tx: DbOrTx, userId: string, email: string) {
	const revoked = await tx
		.update(recommendations)
		.set({ tokenRevokedAt: sql`now()` })
		.where(
			sql`${recommendations.status} = 'sent' and ${recommendations.tokenRevokedAt} is null and (${recommendations.physicianId} = ${userId} or lower(${recommendations.recipientEmail}) = lower(${email}))`
		)
		.returning({ id: recommendations.id });
	return revoked.length;
}

export async function resetPassword(id: string, password: string, who: Actor) {
	const passwordHash = await hashPassword(password);
	const [row] = await getDb().update(users).set({ passwordHash }).where(eq(users.id, id)).returning({ id: users.id });
	if (!row) return false;
	await session.invalidateUserSessions(id);
	await audit.record({ ...who, action: 'user.password_reset', objectType: 'user', objectId: id });
	return true;
}
