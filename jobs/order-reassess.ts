import { DEFAULT_RETRY, QUEUES, type JobDefinition } from '../src/lib/server/queue';
import { reassessOrders, type ReassessJob } from '../src/lib/server/reassess';

/**
 * Re-assesses orders whose facts changed (a new creatinine, albumin, weight or height, or the order
 * itself). One job per order (singleton key = order id); a batch of jobs is one transaction, so a
 * worker killed part-way leaves its jobs to be retried and nothing half-stored. One worker per process:
 * measured on two cores, a second one only made batches smaller and competed for the same CPU; more
 * cores are used by running more worker processes (`npm run worker`). Concurrent batches are safe (flags
 * of an order are serialised by their row locks, and the newest assessment wins).
 */
export const orderReassess: JobDefinition<ReassessJob> = {
	name: QUEUES.orderReassess,
	/**
	 * 'short' keeps at most one queued job per order (singletonKey = order id; enqueueReassess relies on
	 * it), so a burst of results for one patient re-assesses each order once; unlike 'stately' it does
	 * not block fetching while a job for the same order is active, so a worker killed mid-batch cannot
	 * stall the queue until its jobs expire. A batch runs in about a second; after a minute a job whose
	 * worker died is failed by pg-boss's maintenance and retried (an extra assessment is harmless).
	 */
	queue: { ...DEFAULT_RETRY, policy: 'short', expireInSeconds: 60 },
	/**
	 * Up to 500 orders per transaction. The worker looks for work 50 ms after the feed's transaction that
	 * queued it commits (queue/wake.js: the wait gathers the results arriving together into one batch),
	 * and every second regardless. On two cores the web process, the worker and PostgreSQL share the CPU,
	 * so a larger batch taken a little later does less work than small ones taken at once: results that
	 * arrive meanwhile for an order with a job waiting join that job rather than needing another
	 * (measured with `npm run bench`: about 12,000 rather than 16,000 assessments for the 20,000-result
	 * burst, and faster end to end). During a burst the worker is busy and its batches are full (the next
	 * one is taken at once), so being woken changes little there; when idle it saves the wait for the poll.
	 */
	work: { batchSize: 500, pollingIntervalSeconds: 1 },
	gatherMs: 50,
	concurrency: 1,
	async handler(jobs) {
		const result = await reassessOrders(jobs.map((job) => job.data.orderId));
		return { assessed: result.assessed, skipped: result.skipped.length };
	}
};
