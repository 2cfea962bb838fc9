import { sql } from 'drizzle-orm';
import { bigint, boolean, check, index, integer, pgEnum, pgTable, text, timestamp, uuid } from 'drizzle-orm/pg-core';
import { ROLES, type Role } from '../../../domain/vocabulary';
import { at, createdAt, id, updatedAt } from './columns';

export const roleEnum = pgEnum('role', ROLES);
export type { Role };

export const users = pgTable('users', {
	id: id(),
	email: text().notNull().unique(),
	displayName: text().notNull(),
	role: roleEnum().notNull(),
	active: boolean().notNull().default(true),
	passwordHash: text().notNull(),
	createdAt: createdAt(),
	updatedAt: updatedAt()
});

/**
 * Sign-in sessions: the id is the SHA-256 hash of the random token held in the cookie. expiresAt
 * slides with use; createdAt bounds the session's whole life (the absolute lifetime).
 */
export const sessions = pgTable(
	'sessions',
	{
		id: text().primaryKey(),
		userId: uuid()
			.notNull()
			.references(() => users.id, { onDelete: 'cascade' }),
		expiresAt: timestamp({ withTimezone: true, mode: 'date' }).notNull(),
		createdAt: createdAt()
	},
	(t) => [index('sessions_user_id_idx').on(t.userId)]
);

/** Failed sign-ins per key ("email:<address>" or "ip:<address>") for slow-down and lock-out. */
export const signInThrottle = pgTable(
	'sign_in_throttle',
	{
		key: text().primaryKey(),
		failures: integer().notNull().default(0),
		lastFailureAt: at().notNull().defaultNow(),
		lockedUntil: at()
	},
	(t) => [check('failures_non_negative', sql`${t.failures} >= 0`)]
);

/**
 * A user's second factor (TOTP, RFC 6238: SHA-1, 6 digits, 30 s). The secret is encrypted at rest
 * (AES-256-GCM under EBBLINE_TOTP_KEY). enrolledAt is null while an enrolment waits for its first
 * code; lastStep is the last accepted time step, so a code is never accepted twice.
 */
export const userTotp = pgTable('user_totp', {
	userId: uuid()
		.primaryKey()
		.references(() => users.id, { onDelete: 'cascade' }),
	secretEncrypted: text().notNull(),
	enrolledAt: at(),
	lastStep: bigint({ mode: 'number' }),
	createdAt: createdAt()
});

/** Single-use recovery codes: only their SHA-256 hash is kept; usedAt is set when one signs in. */
export const recoveryCodes = pgTable(
	'recovery_codes',
	{
		id: id(),
		userId: uuid()
			.notNull()
			.references(() => users.id, { onDelete: 'cascade' }),
		codeHash: text().notNull().unique(),
		usedAt: at(),
		createdAt: createdAt()
	},
	(t) => [index('recovery_codes_user_id_idx').on(t.userId)]
);

/**
 * The second step of a sign-in: after the right password, a short-lived challenge whose id is the
 * SHA-256 hash of the random token in the browser's cookie. Deleted when used or expired.
 */
export const signInChallenges = pgTable(
	'sign_in_challenges',
	{
		id: text().primaryKey(),
		userId: uuid()
			.notNull()
			.references(() => users.id, { onDelete: 'cascade' }),
		expiresAt: at().notNull(),
		createdAt: createdAt()
	},
	(t) => [index('sign_in_challenges_user_id_idx').on(t.userId)]
);

export const feedTokens = pgTable('feed_tokens', {
	id: id(),
	name: text().notNull(),
	tokenHash: text().notNull().unique(),
	createdBy: uuid().references(() => users.id),
	createdAt: createdAt(),
	lastUsedAt: at(),
	/** optional: after this time the token is refused, as if revoked */
	expiresAt: at(),
	revokedAt: at()
});
