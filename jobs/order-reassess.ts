import { QUEUES } from '../src/lib/server/queue';
import type { JobDefinition } from '../src/lib/server/queue/job';
import { REASSESS_QUEUE, REASSESS_WORK, reassessOrders, type ReassessJob } from '../src/lib/server/reassess';

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
	queue: REASSESS_QUEUE,
	work: REASSESS_WORK,
	concurrency: 1,
	async handler(jobs) {
		const result = await reassessOrders(jobs.map((job) => job.data.orderId));
		return { assessed: result.assessed, skipped: result.skipped.length };
	}
};
