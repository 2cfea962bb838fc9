// Timed snoozes end on their own: the flag.wake job puts every flag whose snooze time has passed back
// on the board, in the state it was snoozed from, without waiting for someone to open it.
import { sql } from 'drizzle-orm';
import { getDb, type DbOrTx } from '../db';

export type WakeResult = { woke: number; flagIds: string[] };

/**
 * Wakes flags snoozed until a time at or before `now` (not those snoozed until the next result): back
 * to the state they were snoozed from ('new' or 'in_review', from their last 'snoozed' event; else
 * 'in_review' when someone holds the flag and 'new' when nobody does), version + 1, a 'woke' event by
 * Ebbline and an audit row, in one statement. Rows another worker (or a pharmacist) holds are skipped
 * (SKIP LOCKED) and a woken flag is no longer snoozed, so overlapping or repeated runs wake each flag
 * once. At most `limit` flags per call; the job calls again while a call comes back full.
 */
export async function wakeDue(now = new Date(), options: { tx?: DbOrTx; limit?: number } = {}): Promise<WakeResult> {
	const at = now.toISOString();
	const limit = options.limit ?? 1000;
	const result = await (options.tx ?? getDb()).execute(sql`
		with due as (
			select f.id, f.snoozed_until,
				(select e.from_state from flag_events e where e.flag_id = f.id and e.kind = 'snoozed' order by e.id desc limit 1) as snoozed_from
			from flags f
			where f.state = 'snoozed' and not f.snooze_until_next_result and f.snoozed_until is not null and f.snoozed_until <= ${at}::timestamptz
			order by f.snoozed_until, f.id
			limit ${limit}
			for update of f skip locked
		), woke as (
			update flags f set
				state = case
					when due.snoozed_from in ('new', 'in_review') then due.snoozed_from
					when f.assigned_to is not null then 'in_review'::flag_state
					else 'new'::flag_state end,
				snoozed_until = null,
				version = f.version + 1,
				updated_at = ${at}::timestamptz
			from due
			where f.id = due.id and f.state = 'snoozed'
			returning f.id, f.state, f.assigned_to, due.snoozed_until
		), events as (
			insert into flag_events (flag_id, actor_id, kind, from_state, to_state, data, at)
			select id, null, 'woke', 'snoozed', state, jsonb_build_object('reason', 'snooze time passed', 'snoozedUntil', snoozed_until), ${at}::timestamptz
			from woke
		), audited as (
			insert into audit_log (actor_id, actor_label, action, object_type, object_id, before, after, at)
			select null, 'system', 'flag.woke', 'flag', id::text,
				jsonb_build_object('state', 'snoozed', 'snoozedUntil', snoozed_until),
				jsonb_build_object('state', state, 'assignedTo', assigned_to, 'reason', 'snooze time passed'),
				${at}::timestamptz
			from woke
		)
		select id from woke`);
	const flagIds = Array.from(result as unknown as Iterable<{ id: string }>, (r) => r.id);
	return { woke: flagIds.length, flagIds };
}

/** Wakes everything due, a batch at a time (what the scheduled job runs). */
export async function wakeAllDue(now = new Date(), batch = 1000): Promise<number> {
	let total = 0;
	for (;;) {
		const { woke } = await wakeDue(now, { limit: batch });
		total += woke;
		if (woke < batch) return total;
	}
}
