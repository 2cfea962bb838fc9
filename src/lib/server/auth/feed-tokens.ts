import type { Actor } from '../../domain/actor';
import { and, desc, eq, isNull } from 'drizzle-orm';
import * as audit from '../audit';
import { getDb } from '../db';
import { feedTokens } from '../db/schema';
import { hashToken, randomToken } from './tokens';

export type FeedTokenActor = Actor;

const DAY_MS = 86_400_000;

/**
 * Creates a token; the secret is returned once and only its hash is stored. `expiresInDays` (optional)
 * sets a time after which the feed refuses it, as if revoked.
 */
export async function create(name: string, who: FeedTokenActor, options: { expiresInDays?: number | null; now?: Date } = {}) {
	const secret = `ebf_${randomToken(32)}`;
	const now = options.now ?? new Date();
	const expiresAt = options.expiresInDays ? new Date(now.getTime() + options.expiresInDays * DAY_MS) : null;
	return getDb().transaction(async (tx) => {
		const [row] = await tx
			.insert(feedTokens)
			.values({ name, tokenHash: hashToken(secret), createdBy: who.actorId, createdAt: now, expiresAt })
			.returning({ id: feedTokens.id, name: feedTokens.name, createdAt: feedTokens.createdAt, expiresAt: feedTokens.expiresAt });
		await audit.record(
			{
				...who,
				action: 'feed_token.created',
				objectType: 'feed_token',
				objectId: row.id,
				after: { name, expiresAt: expiresAt?.toISOString() ?? null },
				at: now
			},
			tx
		);
		return { ...row, secret };
	});
}

export async function revoke(id: string, who: FeedTokenActor) {
	return getDb().transaction(async (tx) => {
		const [row] = await tx
			.update(feedTokens)
			.set({ revokedAt: new Date() })
			.where(and(eq(feedTokens.id, id), isNull(feedTokens.revokedAt)))
			.returning({ id: feedTokens.id, name: feedTokens.name });
		if (row) {
			await audit.record({ ...who, action: 'feed_token.revoked', objectType: 'feed_token', objectId: id, before: { name: row.name } }, tx);
		}
		return row ?? null;
	});
}

export function list() {
	return getDb()
		.select({
			id: feedTokens.id,
			name: feedTokens.name,
			createdAt: feedTokens.createdAt,
			lastUsedAt: feedTokens.lastUsedAt,
			expiresAt: feedTokens.expiresAt,
			revokedAt: feedTokens.revokedAt
		})
		.from(feedTokens)
		.orderBy(desc(feedTokens.createdAt));
}

export type TokenCheck = { state: 'valid'; token: { id: string; name: string } } | { state: 'expired'; expiredAt: Date } | { state: 'unknown' };

/**
 * What a bearer secret is: a valid token, one that has expired (the feed says so, with the time, so the
 * hospital's interface team knows to ask for a new one), or nothing Ebbline knows (unknown or revoked).
 */
export async function check(secret: string, now = new Date()): Promise<TokenCheck> {
	const [row] = await getDb()
		.select({ id: feedTokens.id, name: feedTokens.name, expiresAt: feedTokens.expiresAt })
		.from(feedTokens)
		.where(and(eq(feedTokens.tokenHash, hashToken(secret)), isNull(feedTokens.revokedAt)));
	if (!row) return { state: 'unknown' };
	if (row.expiresAt && row.expiresAt <= now) return { state: 'expired', expiredAt: row.expiresAt };
	// last-used is informational; do not make the request wait for it
	void getDb()
		.update(feedTokens)
		.set({ lastUsedAt: now })
		.where(eq(feedTokens.id, row.id))
		.catch(() => {});
	return { state: 'valid', token: { id: row.id, name: row.name } };
}

/** The token's identity when the bearer secret is valid, not revoked and not expired. */
export async function verify(secret: string, now = new Date()): Promise<{ id: string; name: string } | null> {
	const found = await check(secret, now);
	return found.state === 'valid' ? found.token : null;
}
