import { and, desc, eq } from 'drizzle-orm';
import type { RoleActor } from '../../domain/actor';
import { transition, type FlagAction } from '../../flags/lifecycle';
import * as audit from '../audit';
import { getDb, type DbOrTx } from '../db';
import { flagEvents, flags, users } from '../db/schema';

export type FlagActor = RoleActor;

export type ActResult =
	| { ok: true; flag: typeof flags.$inferSelect }
	| { ok: false; status: 404 | 409 | 422; error: string; conflict?: { version: number; by: string | null; what: string; at: Date } };

/** Event kinds as stored in flag_events (past tense, readable in the history). */
const EVENT_KIND: Record<FlagAction['kind'], string> = {
	claim: 'claimed',
	release: 'released',
	start_review: 'review_started',
	snooze: 'snoozed',
	wake: 'woke',
	note: 'note',
	recommend: 'recommended',
	close: 'closed'
};

async function lastChange(db: DbOrTx, flagId: string) {
	const [event] = await db
		.select({ kind: flagEvents.kind, at: flagEvents.at, by: users.displayName })
		.from(flagEvents)
		.leftJoin(users, eq(users.id, flagEvents.actorId))
		.where(eq(flagEvents.flagId, flagId))
		.orderBy(desc(flagEvents.id))
		.limit(1);
	return event;
}

/**
 * Applies one pharmacist, physician or administrator action to a flag. With `expectedVersion`
 * (what the client loaded) a flag changed by someone else since then is not touched: 409 with who
 * changed it and how. Writes the flag event and an audit row in the same transaction.
 */
export async function act(
	flagId: string,
	action: FlagAction,
	who: FlagActor,
	options: { expectedVersion?: number; tx?: DbOrTx; now?: Date } = {}
): Promise<ActResult> {
	const run = async (tx: DbOrTx): Promise<ActResult> => {
		const [current] = await tx.select().from(flags).where(eq(flags.id, flagId)).for('update');
		if (!current) return { ok: false, status: 404, error: 'No flag with that id.' };
		if (options.expectedVersion !== undefined && options.expectedVersion !== current.version) {
			const change = await lastChange(tx, flagId);
			return {
				ok: false,
				status: 409,
				error: `This flag changed since you loaded it${change ? ` (${change.kind.replace('_', ' ')} by ${change.by ?? 'Ebbline'})` : ''}. Reload it and try again; nothing was overwritten.`,
				conflict: { version: current.version, by: change?.by ?? null, what: change?.kind ?? 'changed', at: change?.at ?? current.updatedAt }
			};
		}
		const next = transition(current, action, who.actorId ?? '', { isAdmin: who.role === 'admin', now: options.now });
		if (!next.ok) return { ok: false, status: current.state === 'closed' ? 409 : 422, error: next.reason };

		const now = options.now ?? new Date();
		const stillSnoozed = next.state === 'snoozed' && action.kind !== 'snooze';
		const [updated] = await tx
			.update(flags)
			.set({
				state: next.state,
				assignedTo: next.assignedTo,
				outcome: next.outcome,
				snoozedUntil: stillSnoozed ? current.snoozedUntil : next.snoozedUntil,
				snoozeUntilNextResult: stillSnoozed ? current.snoozeUntilNextResult : next.snoozeUntilNextResult,
				closedAt: next.state === 'closed' ? now : null,
				firstActionAt: current.firstActionAt ?? (who.actorId ? now : null),
				version: current.version + 1,
				updatedAt: now
			})
			.where(and(eq(flags.id, flagId), eq(flags.version, current.version)))
			.returning();
		const data: Record<string, unknown> = {};
		if (action.kind === 'snooze') Object.assign(data, { until: action.until?.toISOString() ?? null, untilNextResult: action.untilNextResult });
		if (action.kind === 'recommend') data.recommendationId = action.recommendationId;
		if (action.kind === 'close') data.outcome = action.outcome;
		await tx.insert(flagEvents).values({
			flagId,
			actorId: who.actorId,
			kind: EVENT_KIND[action.kind],
			fromState: current.state,
			toState: next.state,
			note: action.kind === 'note' ? action.note.trim() : action.kind === 'close' ? action.reason?.trim() || null : null,
			data,
			at: now
		});
		await audit.record(
			{
				actorId: who.actorId,
				actorLabel: who.actorLabel,
				action: `flag.${EVENT_KIND[action.kind]}`,
				objectType: 'flag',
				objectId: flagId,
				before: { state: current.state, assignedTo: current.assignedTo },
				after: { state: next.state, assignedTo: next.assignedTo, outcome: next.outcome, ...data },
				requestId: who.requestId,
				at: now
			},
			tx
		);
		return { ok: true, flag: updated };
	};
	return options.tx ? run(options.tx) : getDb().transaction(run);
}
