import { QUEUES } from '../src/lib/server/queue';
import type { JobDefinition } from '../src/lib/server/queue/job';
import { REASSESS_QUEUE, REASSESS_WORK, reassessOrders, type ReassessJob } from '../src/lib/server/reassess';

/** Large batches run as two transactions at once: the clinical core and JSON work in this process
 * overlap with PostgreSQL storing the other half (two cores). */
const PARALLEL_FROM = 100;

/**
 * Re-assesses orders whose facts changed (a new creatinine, albumin, weight or height, or the order
 * itself). One job per order (singleton key = order id); the batch is stored in one or two
 * transactions, so a worker killed part-way leaves its jobs to be retried and nothing half-stored.
 */
export const orderReassess: JobDefinition<ReassessJob> = {
	name: QUEUES.orderReassess,
	queue: REASSESS_QUEUE,
	work: REASSESS_WORK,
	async handler(jobs) {
		const ids = [...new Set(jobs.map((job) => job.data.orderId))];
		const halves = ids.length >= PARALLEL_FROM ? [ids.slice(0, ids.length >> 1), ids.slice(ids.length >> 1)] : [ids];
		const results = await Promise.all(halves.map((part) => reassessOrders(part)));
		return {
			assessed: results.reduce((n, r) => n + r.assessed, 0),
			skipped: results.reduce((n, r) => n + r.skipped.length, 0)
		};
	}
};
