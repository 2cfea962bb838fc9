// Ebbline uses pg-boss through its API except in src/lib/server/queue/table.ts, which reads its private
// table pgboss.job: holdWaiting locks a waiting job so the feed's transaction commits before a worker
// can take it (tests/integration/server/reassess/queue-hold.test.ts), and lastFailedJob reads a failed backup run.
// This pins what those rely on, so a pg-boss upgrade that changes it fails here: the table and its
// columns, the 'short' policy's one waiting job per singleton key, and that fetching (FOR UPDATE SKIP
// LOCKED) passes over a row locked FOR KEY SHARE. (pg-boss 10's documented queue policies; PostgreSQL's
// row-lock conflict table, common practice.)
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { backupNightly } from '../../../../jobs/backup-nightly';
import { orderReassess } from '../../../../jobs/order-reassess';
import { getDb } from '../../../../src/lib/server/db';
import { createQueue, getBoss, holdWaiting, lastFailedJob, QUEUES, send, stopBoss } from '../../../../src/lib/server/queue';

const QUEUE = QUEUES.orderReassess;
let n = 0;
const key = () => `contract-${process.pid}-${++n}`;

/** The ids of the jobs a worker could take now (fetched, so they are active afterwards). */
async function fetchIds(): Promise<string[]> {
	const boss = await getBoss();
	return (await boss.fetch(QUEUE, { batchSize: 100 })).map((job) => job.id);
}

async function waitingIdOf(singletonKey: string): Promise<string> {
	const [row] = Array.from(
		(await getDb().execute(sql`select id from pgboss.job where name = ${QUEUE} and singleton_key = ${singletonKey} and state = 'created'`)) as unknown as {
			id: string;
		}[]
	);
	return row.id;
}

beforeAll(async () => {
	expect(orderReassess.queue.policy).toBe('short'); // what holdWaiting's callers assume of order.reassess
	await send(QUEUE, { orderId: 'warm-up' }, { singletonKey: key() }); // creates pg-boss's schema and the queue
	await fetchIds();
});

afterAll(async () => {
	await stopBoss();
});

describe('pg-boss contract relied on by the queue layer', () => {
	it('has the table and columns the queue layer names', async () => {
		const columns = Array.from(
			(await getDb().execute(sql`
				select column_name, data_type, udt_name from information_schema.columns
				where table_schema = 'pgboss' and table_name = 'job'
					and column_name in ('id', 'name', 'state', 'policy', 'singleton_key', 'completed_on', 'output')
				order by column_name`)) as unknown as { column_name: string; udt_name: string }[],
			(c) => `${c.column_name}:${c.udt_name}`
		);
		expect(columns).toEqual(['completed_on:timestamptz', 'id:uuid', 'name:text', 'output:jsonb', 'policy:text', 'singleton_key:text', 'state:job_state']);
		const states = Array.from(
			(await getDb().execute(sql`select unnest(enum_range(null::pgboss.job_state))::text as state`)) as unknown as { state: string }[],
			(r) => r.state
		);
		expect(states).toEqual(expect.arrayContaining(['created', 'active', 'failed']));
	});

	it("keeps one waiting job per singleton key in a 'short' queue, and holdWaiting finds it", async () => {
		const k = key();
		expect(await send(QUEUE, { orderId: k }, { singletonKey: k })).toEqual(expect.any(String));
		expect(await send(QUEUE, { orderId: k }, { singletonKey: k })).toBeNull();
		const count = Array.from(
			(await getDb().execute(sql`select count(*)::int as n from pgboss.job where name = ${QUEUE} and singleton_key = ${k}`)) as unknown as { n: number }[]
		);
		expect(count[0].n).toBe(1);
		expect(await getDb().transaction((tx) => holdWaiting(tx, QUEUE, [k, key()]))).toEqual(new Set([k]));
		const id = await waitingIdOf(k);
		expect(await fetchIds()).toContain(id); // the job is the queue's, workable as usual
	});

	it('does not let a worker fetch a job held FOR KEY SHARE until the holding transaction ends', async () => {
		const k = key();
		await send(QUEUE, { orderId: k }, { singletonKey: k });
		const id = await waitingIdOf(k);
		await getDb().transaction(async (tx) => {
			expect(await holdWaiting(tx, QUEUE, [k])).toEqual(new Set([k]));
			expect(await fetchIds()).not.toContain(id);
		});
		expect(await fetchIds()).toContain(id);
	});

	it('lets a new job wait beside an active one with the same key, and holdWaiting skips the active one', async () => {
		const k = key();
		await send(QUEUE, { orderId: k }, { singletonKey: k });
		const first = await waitingIdOf(k);
		expect(await fetchIds()).toContain(first);
		expect(await getDb().transaction((tx) => holdWaiting(tx, QUEUE, [k]))).toEqual(new Set());
		const second = await send(QUEUE, { orderId: k }, { singletonKey: k });
		expect(second).toEqual(expect.any(String));
		expect(second).not.toBe(first);
		expect(await getDb().transaction((tx) => holdWaiting(tx, QUEUE, [k]))).toEqual(new Set([k]));
	});

	it('keeps a failed job with its time and error, as lastFailedJob reads it', async () => {
		const boss = await getBoss();
		await createQueue(boss, backupNightly);
		await boss.send(QUEUES.backupNightly, { contract: true }, { retryLimit: 0 });
		const jobs = await boss.fetch(QUEUES.backupNightly, { batchSize: 10 });
		expect(jobs).toHaveLength(1);
		const before = Date.now();
		for (const job of jobs) await boss.fail(QUEUES.backupNightly, job.id, new Error('pg_dump: disk full'));
		const failed = await lastFailedJob(QUEUES.backupNightly);
		expect(failed?.at).toBeInstanceOf(Date);
		expect(Math.abs(failed!.at.getTime() - before)).toBeLessThan(60_000);
		expect(failed?.output).toMatchObject({ message: 'pg_dump: disk full' });
	});
});
