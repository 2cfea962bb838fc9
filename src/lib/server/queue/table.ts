// The only code that reads pg-boss's own table (pgboss.job) rather than its API. What it relies on is
// pinned by tests/integration/server/queue/pg-boss-contract.test.ts: run it after every pg-boss upgrade.
import { sql } from 'drizzle-orm';
import { getDb, type DbOrTx } from '../db';
import type { QueueName } from './job';
import { ensureQueue } from './send';

/**
 * The keys among `singletonKeys` whose job in `queue` (a 'short' queue) is waiting, each such job
 * locked FOR KEY SHARE until the caller's transaction ends. pg-boss takes jobs with FOR UPDATE SKIP
 * LOCKED, so a worker passes over a held job: it cannot start one before the transaction that found it
 * waiting (and relies on it to see its data) has committed.
 */
export async function holdWaiting(tx: DbOrTx, queue: QueueName, singletonKeys: readonly string[]): Promise<Set<string>> {
	await ensureQueue(queue); // pg-boss's schema and the queue exist before its table is read
	const held = await tx.execute(sql`
		select singleton_key as "key" from pgboss.job
		where name = ${queue} and state = 'created' and policy = 'short'
			and coalesce(singleton_key, '') = any(${sql.param(singletonKeys)}::text[])
		for key share`);
	return new Set(Array.from(held as unknown as Iterable<{ key: string }>, (r) => r.key));
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
