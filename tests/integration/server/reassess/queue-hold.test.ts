// A result that arrives while its order already has an order.reassess job waiting must be seen by that
// job: the feed's transaction holds the waiting job until it commits, so a worker cannot take it and
// assess the order on the facts from before the result. (Common practice for a transactional outbox
// queue; the property is ours, stated in src/lib/server/reassess/order.ts.)
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { getBoss, QUEUES, stopBoss } from '../../../../src/lib/server/queue';
import { enqueueReassess, type ReassessJob } from '../../../../src/lib/server/reassess';
import { admissionsBundle, type SyntheticWard } from '../../../fixtures/synthetic-feed';
import { drainReassess, ingestText, queuedOrderIds, withAgents } from '../feed/helpers';

const WARD: SyntheticWard = { prefix: 'hold', mrnPrefix: 'HO', family: 'Holdtest', patients: 2, t0Ms: Date.parse('2026-11-22T06:00:00Z') };

let orderIds: string[] = [];

beforeAll(async () => {
	await withAgents();
	await ingestText(admissionsBundle(WARD));
	await drainReassess();
	const rows = await getDb().execute(sql`select o.id from orders o where o.source_id like 'hold-p-%' order by o.source_id`);
	orderIds = Array.from(rows as unknown as { id: string }[], (r) => r.id);
});

afterAll(async () => {
	await drainReassess();
	await stopBoss();
});

/** Jobs a worker could take now for these orders (fetched, then handed back untouched). */
async function takeable(ids: string[]): Promise<string[]> {
	const boss = await getBoss();
	const jobs = await boss.fetch<ReassessJob>(QUEUES.orderReassess, { batchSize: 100 });
	const ours = jobs.filter((j) => ids.includes(j.data.orderId)).map((j) => j.data.orderId);
	// put them back as they were, for the next look
	if (jobs.length > 0)
		await getDb().execute(sql`update pgboss.job set state = 'created', started_on = null where id = any(${sql.param(jobs.map((j) => j.id))}::uuid[])`);
	return ours.sort();
}

describe('order.reassess jobs and the feed transaction', () => {
	it('a waiting job is held while a transaction that adds facts for its order is open, and taken after', async () => {
		const [first, second] = orderIds;
		expect(orderIds).toHaveLength(2);
		// a job waits for the first order, as after an earlier result
		await enqueueReassess(getDb(), [first]);
		expect(await queuedOrderIds()).toContain(first);

		let seenInside: string[] = [];
		await getDb().transaction(async (tx) => {
			const queued = await enqueueReassess(tx, [first, second]);
			expect(queued).toBe(2);
			seenInside = await takeable([first, second]);
		});
		// neither the held job nor the new one (not committed yet) could be taken
		expect(seenInside).toEqual([]);
		// after the commit both can be, and there is one job per order
		expect(await takeable([first, second])).toEqual([first, second].sort());
		const counts = await getDb().execute(sql`
			select singleton_key, count(*)::int as n from pgboss.job
			where name = ${QUEUES.orderReassess} and state = 'created' and singleton_key = any(${sql.param(orderIds)}::text[])
			group by singleton_key`);
		expect(Array.from(counts as unknown as { n: number }[], (r) => r.n)).toEqual([1, 1]);
	});

	it('a job already taken by a worker does not stop a new one being queued', async () => {
		const [first] = orderIds;
		await drainReassess();
		await enqueueReassess(getDb(), [first]);
		const boss = await getBoss();
		const [active] = await boss.fetch<ReassessJob>(QUEUES.orderReassess, { batchSize: 1 });
		expect(active?.data.orderId).toBe(first);
		await getDb().transaction(async (tx) => {
			await enqueueReassess(tx, [first]);
		});
		expect(await queuedOrderIds()).toContain(first);
		await boss.complete(QUEUES.orderReassess, active.id);
	});
});
