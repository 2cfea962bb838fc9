// Renal replacement therapy on record for a patient: what the feed says (dialysis sessions and
// conditions) and what a pharmacist sets or clears on the patient page. Setting or clearing is audited
// and re-assesses the patient's active orders in the same transaction.
import { and, desc, eq, sql } from 'drizzle-orm';
import { renalReplacementNow, type RenalReplacementEpisode, type RenalReplacementMode } from '../../clinical';
import * as audit from '../audit';
import { config } from '../config';
import { getDb, type DbOrTx } from '../db';
import { orders, renalReplacementEvents, users } from '../db/schema';
import { enqueueReassess, loadRenalReplacement } from '../reassess';
import type { Actor } from '../../domain/actor';

export type RenalReplacementStatus = {
	/** the period in force now, or null */
	current: { mode: RenalReplacementMode; since: string } | null;
	lastSessionAt: string | null;
	/** the latest pharmacist statement, when there is one */
	lastStatement: { kind: 'set' | 'clear'; at: string; by: string | null; reason: string | null } | null;
	episodes: { mode: RenalReplacementMode; from: string; to: string | null }[];
};

export async function statusOf(patientId: string, now = new Date(), db: DbOrTx = getDb()): Promise<RenalReplacementStatus> {
	const episodes: RenalReplacementEpisode[] = (await loadRenalReplacement(db, [patientId])).get(patientId) ?? [];
	const current = renalReplacementNow(episodes, now.getTime());
	const [lastSession] = await db
		.select({ at: renalReplacementEvents.fromAt })
		.from(renalReplacementEvents)
		.where(and(eq(renalReplacementEvents.patientId, patientId), eq(renalReplacementEvents.kind, 'session')))
		.orderBy(desc(renalReplacementEvents.fromAt))
		.limit(1);
	const [statement] = await db
		.select({ kind: renalReplacementEvents.kind, at: renalReplacementEvents.fromAt, by: users.displayName, reason: renalReplacementEvents.reason })
		.from(renalReplacementEvents)
		.leftJoin(users, eq(users.id, renalReplacementEvents.setBy))
		.where(and(eq(renalReplacementEvents.patientId, patientId), sql`${renalReplacementEvents.kind} in ('set', 'clear')`))
		.orderBy(desc(renalReplacementEvents.createdAt))
		.limit(1);
	return {
		current: current === null ? null : { mode: current.mode, since: current.from.toISOString() },
		lastSessionAt: lastSession ? lastSession.at.toISOString() : null,
		lastStatement: statement ? { kind: statement.kind as 'set' | 'clear', at: statement.at.toISOString(), by: statement.by, reason: statement.reason } : null,
		episodes: episodes.map((e) => ({ mode: e.mode, from: e.from.toISOString(), to: e.to === null ? null : e.to.toISOString() }))
	};
}

async function reassessPatient(tx: DbOrTx, patientId: string): Promise<number> {
	const active = await tx
		.select({ id: orders.id })
		.from(orders)
		.where(and(eq(orders.patientId, patientId), eq(orders.status, 'active')));
	return enqueueReassess(
		tx,
		active.map((o) => o.id)
	);
}

/** A pharmacist states the patient is on this modality since `sinceLocal` (hospital time). */
export async function setStatus(
	patientId: string,
	input: { mode: RenalReplacementMode; sinceLocal: string; reason: string },
	who: Actor,
	options: { timeZone?: string; db?: DbOrTx } = {}
): Promise<{ ordersQueued: number }> {
	const timeZone = options.timeZone ?? config.hospitalTimeZone;
	return (options.db ?? getDb()).transaction(async (tx) => {
		const [row] = Array.from(
			(await tx.execute(sql`
				insert into renal_replacement_events (patient_id, kind, mode, from_at, set_by, reason)
				values (${patientId}::uuid, 'set', ${input.mode}, (${input.sinceLocal.replace('T', ' ')}::timestamp at time zone ${timeZone}), ${who.actorId}::uuid, ${input.reason})
				returning id, from_at`)) as unknown as Iterable<{ id: string; from_at: Date }>
		);
		await audit.record(
			{
				...who,
				action: 'patient.renal_replacement_set',
				objectType: 'patient',
				objectId: patientId,
				after: { mode: input.mode, since: new Date(row.from_at).toISOString(), event: row.id }
			},
			tx
		);
		return { ordersQueued: await reassessPatient(tx, patientId) };
	});
}

/** A pharmacist states the patient is no longer on renal replacement therapy, from now. */
export async function clearStatus(
	patientId: string,
	input: { reason: string },
	who: Actor,
	options: { now?: Date; db?: DbOrTx } = {}
): Promise<{ ordersQueued: number }> {
	const now = options.now ?? new Date();
	return (options.db ?? getDb()).transaction(async (tx) => {
		const before = await statusOf(patientId, now, tx);
		const [row] = await tx
			.insert(renalReplacementEvents)
			.values({ patientId, kind: 'clear', mode: null, fromAt: now, setBy: who.actorId, reason: input.reason })
			.returning({ id: renalReplacementEvents.id });
		await audit.record(
			{
				...who,
				action: 'patient.renal_replacement_cleared',
				objectType: 'patient',
				objectId: patientId,
				before: { mode: before.current?.mode ?? null },
				after: { mode: null, event: row.id }
			},
			tx
		);
		return { ordersQueued: await reassessPatient(tx, patientId) };
	});
}
