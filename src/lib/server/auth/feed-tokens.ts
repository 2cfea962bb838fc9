import type { Actor } from '../../domain/actor';
import { and, desc, eq, isNull } from 'drizzle-orm';
import * as audit from '../audit';
import { getDb } from '../db';
import { feedTokens } from '../db/schema';
import { hashToken, randomToken } from './tokens';

export type FeedTokenActor = Actor;

/** Creates a token; the secret is returned once and only its hash is stored. */
export async function create(name: string, who: FeedTokenActor) {
	const secret = `ebf_${randomToken(32)}`;
	return getDb().transaction(async (tx) => {
		const [row] = await tx
			.insert(feedTokens)
			.values({ name, tokenHash: hashToken(secret), createdBy: who.actorId })
			.returning({ id: feedTokens.id, name: feedTokens.name, createdAt: feedTokens.createdAt });
		await audit.record({ ...who, action: 'feed_token.created', objectType: 'feed_token', objectId: row.id, after: { name } }, tx);
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
			revokedAt: feedTokens.revokedAt
		})
		.from(feedTokens)
		.orderBy(desc(feedTokens.createdAt));
}

/** The token's identity when the bearer secret is valid and not revoked. */
export async function verify(secret: string): Promise<{ id: string; name: string } | null> {
	const [row] = await getDb()
		.select({ id: feedTokens.id, name: feedTokens.name })
		.from(feedTokens)
		.where(and(eq(feedTokens.tokenHash, hashToken(secret)), isNull(feedTokens.revokedAt)));
	if (!row) return null;
	// last-used is informational; do not make the request wait for it
	void getDb()
		.update(feedTokens)
		.set({ lastUsedAt: new Date() })
		.where(eq(feedTokens.id, row.id))
		.catch(() => {});
	return row;
}
