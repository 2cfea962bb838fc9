// The only code that reads pg-boss's own table (pgboss.job) rather than its API. What it relies on is
// pinned by tests/integration/server/queue/pg-boss-contract.test.ts: run it after every pg-boss upgrade.
import { sql } from 'drizzle-orm';
import { getDb, type DbOrTx } from '../db';
import type { QueueName } from './job';
import { ensureQueue, wakeOnCommit } from './send';

/**
 * The keys among `singletonKeys` whose job in `queue` (a 'short' queue) is waiting, each such job
 * locked FOR KEY SHARE until the caller's transaction ends. pg-boss takes jobs with FOR UPDATE SKIP
 * LOCKED, so a worker passes over a held job: it cannot start one before the transaction that found it
 * waiting (and relies on it to see its data) has committed; the workers are woken then (wakeOnCommit).
 */
export async function holdWaiting(tx: DbOrTx, queue: QueueName, singletonKeys: readonly string[]): Promise<Set<string>> {
	await ensureQueue(queue); // pg-boss's schema and the queue exist before its table is read
	const held = await tx.execute(sql`
		select singleton_key as "key" from pgboss.job
		where name = ${queue} and state = 'created' and policy = 'short'
			and coalesce(singleton_key, '') = any(${sql.param(singletonKeys)}::text[])
		for key share`);
	const keys = new Set(Array.from(held as unknown as Iterable<{ key: string }>, (r) => r.key));
	// a worker that looked while these were held passed over them: it is told again when they are released
	if (keys.size > 0) await wakeOnCommit(tx, queue);
	return keys;
}

export type FailedJob = { at: Date; output: unknown };

/** The newest failed job of `queue` with the output pg-boss kept (the error), or null (none, or pg-boss not yet started here). */
export async function lastFailedJob(queue: QueueName, db: DbOrTx = getDb()): Promise<FailedJob | null> {
	// pg-boss creates its schema when it first starts; until then no job can have failed
	const [present] = Array.from((await db.execute(sql`select to_regclass('pgboss.job') is not null as present`)) as unknown as { present: boolean }[]);
	if (!present.present) return null;
	const [failed] = Array.from(
		(await db.execute(sql`
			select completed_on as at, output from pgboss.job
			where name = ${queue} and state = 'failed' order by completed_on desc limit 1`)) as unknown as { at: Date | string; output: unknown }[]
	);
	return failed ? { at: new Date(failed.at), output: failed.output } : null;
}

/** How many jobs of one queue wait or run: `due` could be taken now, `later` wait for their start time (a retry's delay, a scheduled reminder). */
export type QueueDepth = { queue: string; due: number; later: number; active: number; oldestDueAt: Date | null };

/**
 * Every queue with a job waiting or running, by name. The waiting jobs are counted through pg-boss's
 * fetch index (job_i5: name, start_after where state < 'active'; an index-only scan). pg-boss has no
 * index that finds running jobs, so counting them reads the job rows pg-boss has not yet archived
 * (finished jobs stay about 12 hours): measured 57 ms with 220,000 of them, a few ms for a normal day.
 */
export async function queueDepths(db: DbOrTx = getDb()): Promise<QueueDepth[]> {
	const [present] = Array.from((await db.execute(sql`select to_regclass('pgboss.job') is not null as present`)) as unknown as { present: boolean }[]);
	if (!present.present) return [];
	const rows = Array.from(
		(await db.execute(sql`
			with waiting as (
				select name,
					count(*) filter (where start_after <= now())::int as due,
					count(*) filter (where start_after > now())::int as later,
					min(created_on) filter (where start_after <= now()) as oldest_due_at
				from pgboss.job where state < 'active' group by name),
			running as (select name, count(*)::int as active from pgboss.job where state = 'active' group by name)
			select coalesce(w.name, r.name) as queue, coalesce(w.due, 0) as due, coalesce(w.later, 0) as later,
				coalesce(r.active, 0) as active, w.oldest_due_at
			from waiting w full join running r on r.name = w.name
			order by 1`)) as unknown as { queue: string; due: number; later: number; active: number; oldest_due_at: Date | string | null }[]
	);
	return rows.map((r) => ({
		queue: r.queue,
		due: r.due,
		later: r.later,
		active: r.active,
		oldestDueAt: r.oldest_due_at === null ? null : new Date(r.oldest_due_at)
	}));
}
