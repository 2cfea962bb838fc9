// The feed's lag on the administrator's home page: a stored result waits until its active orders have
// been re-assessed after it; the queue shows the job that will do it. (The definition is ours, stated in
// src/lib/server/ops/feed-lag.ts.)
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { feedLag } from '../../../../src/lib/server/ops';
import { QUEUES, stopBoss } from '../../../../src/lib/server/queue';
import { admissionsBundle, resultsBundle, type SyntheticWard } from '../../../fixtures/synthetic-feed';
import { drainReassess, ingestText, withAgents } from '../feed/helpers';

const WARD: SyntheticWard = { prefix: 'lag', mrnPrefix: 'LG', family: 'Lagtest', patients: 3, t0Ms: Date.parse('2026-11-22T06:00:00Z') };
const reassessDepth = async () => (await feedLag()).queues.find((q) => q.queue === QUEUES.orderReassess);

beforeAll(async () => {
	await withAgents();
});

afterAll(async () => {
	await drainReassess();
	await stopBoss();
});

describe('feed lag and queue depth', () => {
	it('says nothing has arrived before the first feed message', async () => {
		const lag = await feedLag();
		expect(lag).toMatchObject({ lagMs: 0, waitingSince: null, ordersWaiting: 0, lastMessage: null });
	});

	it('is up to date once the admitted orders are assessed, and names the last message', async () => {
		await ingestText(admissionsBundle(WARD));
		await drainReassess();
		const lag = await feedLag();
		expect(lag).toMatchObject({ lagMs: 0, waitingSince: null, ordersWaiting: 0 });
		expect(lag.lastMessage?.source).toBe('fhir');
		expect(lag.lastMessage?.ageMs).toBeGreaterThanOrEqual(0);
		expect(lag.lastMessage?.ageMs).toBeLessThan(60_000);
		expect((await reassessDepth())?.due ?? 0).toBe(0);
	});

	it('grows while a stored result waits for its orders, with their jobs in the queue, and clears after re-assessment', async () => {
		// results for two of the three patients
		await ingestText(resultsBundle(WARD, 1, 0, 2));
		await new Promise((resolve) => setTimeout(resolve, 50));
		const waiting = await feedLag();
		expect(waiting.ordersWaiting).toBe(2);
		expect(waiting.waitingSince).toBeInstanceOf(Date);
		expect(waiting.lagMs).toBeGreaterThanOrEqual(50);
		const depth = await reassessDepth();
		expect(depth?.due).toBe(2);
		expect(depth?.oldestDueAt).toBeInstanceOf(Date);

		// a later result does not move the lag: the oldest waiting one sets it
		await ingestText(resultsBundle(WARD, 2, 2, 3));
		const more = await feedLag();
		expect(more.ordersWaiting).toBe(3);
		expect(more.waitingSince).toEqual(waiting.waitingSince);
		expect(more.lagMs).toBeGreaterThanOrEqual(waiting.lagMs);

		expect(await drainReassess()).toBe(3);
		const cleared = await feedLag();
		expect(cleared).toMatchObject({ lagMs: 0, waitingSince: null, ordersWaiting: 0 });
		expect((await reassessDepth())?.due ?? 0).toBe(0);
		expect(cleared.lastMessage?.receivedAt.getTime()).toBeGreaterThanOrEqual(waiting.lastMessage?.receivedAt.getTime() ?? Infinity);
	});

	it('leaves out the results of a stopped order', async () => {
		await ingestText(resultsBundle(WARD, 3, 0, 1));
		expect((await feedLag()).ordersWaiting).toBe(1);
		await getDb().execute(sql`update orders set status = 'stopped', stopped_at = now() where source_id = ${`${WARD.prefix}-p-0-rx`}`);
		expect(await feedLag()).toMatchObject({ lagMs: 0, waitingSince: null, ordersWaiting: 0 });
	});
});
