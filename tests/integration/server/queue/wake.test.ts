// Workers woken by the senders' notification (src/lib/server/queue/wake.js, work-loop.js): a job queued
// in a transaction is taken soon after the commit rather than at the worker's next poll, and a burst
// is still worked in full batches rather than one small batch per sending transaction.
import type PgBoss from 'pg-boss';
import { afterAll, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { orderReassess } from '../../../../jobs/order-reassess';
import { getDb } from '../../../../src/lib/server/db';
import { createBoss, createQueue, QUEUES, sendMany, stopBoss } from '../../../../src/lib/server/queue';
import { listenForWork, type WakeListener } from '../../../../src/lib/server/queue/wake.js';
import { workQueue } from '../../../../src/lib/server/queue/work-loop.js';

const QUEUE = QUEUES.orderReassess;
const POLL_S = 5; // the fallback; every wait below is well under it
const BATCH = 500;
const GATHER_MS = 50;
/** the handler's pretend work per job, so that a burst is sent faster than it is worked (as on two cores) */
const WORK_MS_PER_JOB = 2;

type Batch = { size: number; startedAt: number };
let boss: PgBoss;
let listener: WakeListener;
let batches: Batch[] = [];
let worked = 0;
let n = 0;
const key = () => `wake-${process.pid}-${++n}`;
const sleep = (ms: number) => new Promise((resolve) => setTimeout(resolve, ms));

/** Queues `count` jobs in one transaction, as the feed does (sendMany with its transaction); `beforeCommit` runs inside it. */
async function queueJobs(count: number, beforeCommit?: () => Promise<void>) {
	await getDb().transaction(async (tx) => {
		await sendMany(
			QUEUE,
			Array.from({ length: count }, () => {
				const orderId = key();
				return { data: { orderId }, singletonKey: orderId };
			}),
			{ tx }
		);
		await beforeCommit?.();
	});
}

async function until(done: () => boolean, timeoutMs: number) {
	const start = Date.now();
	while (!done()) {
		if (Date.now() - start > timeoutMs) return false;
		await sleep(10);
	}
	return true;
}

beforeAll(async () => {
	boss = createBoss();
	await boss.start();
	await createQueue(boss, orderReassess);
	listener = await listenForWork(process.env.DATABASE_URL!);
	await workQueue(
		boss,
		QUEUE,
		{ batchSize: BATCH, pollingIntervalSeconds: POLL_S },
		async (jobs) => {
			batches.push({ size: jobs.length, startedAt: Date.now() });
			await sleep(jobs.length * WORK_MS_PER_JOB);
			worked += jobs.length;
		},
		1,
		{ listener, gatherMs: GATHER_MS }
	);
});

afterAll(async () => {
	await listener?.stop();
	await boss?.stop({ graceful: true, wait: true, timeout: 10_000 });
	await stopBoss();
});

beforeEach(async () => {
	// the worker's first fetch (at start) or the previous test's last one is over: it now sleeps out its interval
	await sleep(300);
	batches = [];
	worked = 0;
});

describe('waking the workers when work is queued', () => {
	it('takes a job soon after its transaction commits, not at the next poll, and not before the commit', async () => {
		let committingAt = 0;
		await queueJobs(1, async () => {
			// the notification is in this transaction; nothing may be taken while it is open
			await sleep(400);
			expect(batches).toEqual([]);
			committingAt = Date.now();
		});
		const committedAt = Date.now();
		expect(await until(() => worked === 1, POLL_S * 1000)).toBe(true);
		expect(batches).toHaveLength(1);
		expect(batches[0].startedAt).toBeGreaterThanOrEqual(committingAt);
		// the poll would come about 5 s after the last fetch; a woken worker takes it within the gathering window and a fetch
		expect(batches[0].startedAt - committedAt).toBeLessThan(1500);
	});

	it('wakes again for each later commit while idle', async () => {
		for (let round = 1; round <= 3; round++) {
			await sleep(200);
			const committedAt = Date.now();
			await queueJobs(2);
			expect(await until(() => worked === 2 * round, POLL_S * 1000)).toBe(true);
			expect(batches.at(-1)!.startedAt - committedAt).toBeLessThan(1500);
		}
	});

	it('works a burst of 2,000 jobs from 200 transactions in a few full batches', async () => {
		const perTransaction = 10;
		let next = 0;
		const sender = async () => {
			while (next < 200) {
				next++;
				await queueJobs(perTransaction);
			}
		};
		const sentAt = Date.now();
		await Promise.all(Array.from({ length: 4 }, sender));
		const sendMs = Date.now() - sentAt;
		expect(await until(() => worked === 2000, 60_000)).toBe(true);
		const sizes = batches.map((b) => b.size);
		expect(sizes.reduce((a, b) => a + b, 0)).toBe(2000);
		expect(Math.max(...sizes)).toBe(BATCH); // the backlog fills batches
		// one batch per sending transaction would be 200; 2,000 jobs make at least 4 of 500
		expect(sizes.length, `batches ${sizes.join(',')} (sent in ${sendMs} ms)`).toBeLessThanOrEqual(25);
	});
});
