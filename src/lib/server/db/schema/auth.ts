import { sql } from 'drizzle-orm';
import { boolean, check, index, integer, pgEnum, pgTable, text, timestamp, uuid } from 'drizzle-orm/pg-core';
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
