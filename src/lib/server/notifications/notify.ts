import { and, count, desc, eq, isNull } from 'drizzle-orm';
import * as audit from '../audit';
import { getDb, type DbOrTx } from '../db';
import { notifications } from '../db/schema';

/** Tells a user something in the app (shown in the header until read). Pass the transaction. */
/** `at`: when it was raised (the database's clock when absent; a replayed history passes its own). */
export async function notify(db: DbOrTx, userId: string, text: string, link: string | null = null, at?: Date) {
	await db.insert(notifications).values({ userId, text, link, ...(at ? { createdAt: at } : {}) });
}

export async function unreadCount(userId: string): Promise<number> {
	const [row] = await getDb()
		.select({ n: count() })
		.from(notifications)
		.where(and(eq(notifications.userId, userId), isNull(notifications.readAt)));
	return row?.n ?? 0;
}

export function list(userId: string, limit = 100) {
	return getDb()
		.select({ id: notifications.id, text: notifications.text, link: notifications.link, createdAt: notifications.createdAt, readAt: notifications.readAt })
		.from(notifications)
		.where(eq(notifications.userId, userId))
		.orderBy(desc(notifications.createdAt))
		.limit(limit);
}

/** Marks the user's notifications read (one, or all when no id is given); returns how many changed. */
export async function markRead(who: { actorId: string; actorLabel: string; requestId: string | null }, id?: string, now = new Date()): Promise<number> {
	const userId = who.actorId;
	const where = id
		? and(eq(notifications.userId, userId), eq(notifications.id, id), isNull(notifications.readAt))
		: and(eq(notifications.userId, userId), isNull(notifications.readAt));
	return getDb().transaction(async (tx) => {
		const rows = await tx.update(notifications).set({ readAt: now }).where(where).returning({ id: notifications.id });
		if (rows.length > 0) {
			await audit.record({ ...who, action: 'notifications.read', objectType: 'user', objectId: userId, after: { count: rows.length }, at: now }, tx);
		}
		return rows.length;
	});
}
