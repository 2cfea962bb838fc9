import type { Actor } from '../../domain/actor';
import { getDb, type DbOrTx } from '../db';
import { auditLog } from '../db/schema';

export type AuditEntry = {
	actorId?: string | null;
	actorLabel: string;
	action: string;
	objectType: string;
	objectId?: string | null;
	before?: unknown;
	after?: unknown;
	requestId?: string | null;
	/** when it happened; the database's clock when absent (a replayed history passes its own) */
	at?: Date;
};

/** Append one row to the audit log; pass the transaction so the row commits with the change. */
export async function record(entry: AuditEntry, db: DbOrTx = getDb()) {
	await db.insert(auditLog).values({
		actorId: entry.actorId ?? null,
		actorLabel: entry.actorLabel,
		action: entry.action,
		objectType: entry.objectType,
		objectId: entry.objectId ?? null,
		before: entry.before ?? null,
		after: entry.after ?? null,
		requestId: entry.requestId ?? null,
		...(entry.at ? { at: entry.at } : {})
	});
}

/** The actor fields for a signed-in user. */
export function actor(locals: { user: { id: string; email: string } | null; requestId?: string }): Actor {
	return {
		actorId: locals.user?.id ?? null,
		actorLabel: locals.user?.email ?? 'anonymous',
		requestId: locals.requestId ?? null
	};
}
