// How far behind the feed the assessments are, for the administrator's home page.
//
// The feed's lag: a result waits from the moment it was stored until every active order of its patient
// has been re-assessed after it (an assessment stored later than the result). The lag is how long ago the
// oldest waiting result was stored; 0 when nothing waits. For an order never assessed, its results wait
// from when the order itself arrived. An order the clinical core could not assess (bad facts, logged as
// "order not assessed") keeps its results waiting: the lag then shows that something needs a look.
// An assessment that started while a result was being stored counts as made after it; the job the
// result queued for its order re-assesses it again within seconds.
import { sql } from 'drizzle-orm';
import { getDb, type Database, type DbOrTx } from '../db';
import { queueDepths, type QueueDepth } from '../queue';

export type FeedLag = {
	/** how long ago the oldest result still waiting for re-assessment was stored (0 when none waits) */
	lagMs: number;
	/** when that result was stored, or null when none waits */
	waitingSince: Date | null;
	/** active orders with at least one result stored after their latest assessment */
	ordersWaiting: number;
	/** the newest feed message (any source), or null before the first */
	lastMessage: { receivedAt: Date; ageMs: number; source: string } | null;
	/** queues with jobs waiting or running (none listed: every queue is empty) */
	queues: QueueDepth[];
};

type Row = Record<string, unknown>;
const rows = <T extends Row>(result: unknown) => Array.from(result as Iterable<T>);
const toDate = (v: unknown) => (v instanceof Date ? v : new Date(v as string));

/**
 * The feed's lag, its last message and the queues' depth, read in one transaction. Times are measured
 * against the database's clock, the one that stamped the results.
 *
 * Cost: index scans only, per active order (orders_active_idx): its latest assessment is one backward
 * step of assessments_order_idx (order_id, at) — for an active order the latest `at` is the latest
 * assessment made, as `at` is the time it was made (only the demo seed passes an earlier one, before any
 * other) — and its patient's results through lab_results_patient_idx. Measured on 20,000 patients,
 * 1,000,000 results and 1,000,000 assessments with 1,500 active orders: about 75 ms. Ebbline's connections
 * run without JIT (db/index.ts): the planner's estimate for that many orders crosses jit_above_cost, and
 * compiling cost 300 ms more than running the query.
 */
export async function feedLag(db: Database = getDb()): Promise<FeedLag> {
	return read(db);
}

async function read(db: DbOrTx): Promise<FeedLag> {
	const [lag] = rows<{ waiting_since: Date | string | null; lag_ms: number | null; orders_waiting: number }>(
		await db.execute(sql`
			with waiting as (
				select greatest(r.first_at, o.created_at) as since
				from orders o
				left join lateral (select a.created_at as last_at from assessments a where a.order_id = o.id order by a.at desc limit 1) a on true
				cross join lateral (
					select min(r.created_at) as first_at from lab_results r
					where r.patient_id = o.patient_id and (a.last_at is null or r.created_at > a.last_at)) r
				where o.status = 'active' and r.first_at is not null)
			select min(since) as waiting_since, (extract(epoch from now() - min(since)) * 1000)::float8 as lag_ms, count(*)::int as orders_waiting
			from waiting`)
	);
	const [last] = rows<{ received_at: Date | string; age_ms: number; source: string }>(
		await db.execute(sql`
			select received_at, (extract(epoch from now() - received_at) * 1000)::float8 as age_ms, source
			from feed_messages order by received_at desc limit 1`)
	);
	return {
		lagMs: lag.waiting_since === null ? 0 : Math.max(0, lag.lag_ms ?? 0),
		waitingSince: lag.waiting_since === null ? null : toDate(lag.waiting_since),
		ordersWaiting: lag.orders_waiting,
		lastMessage: last ? { receivedAt: toDate(last.received_at), ageMs: Math.max(0, last.age_ms), source: last.source } : null,
		queues: await queueDepths(db)
	};
}
