import { logger } from '../src/lib/server/logger';
import { QUEUES } from '../src/lib/server/queue';
import type { JobDefinition } from '../src/lib/server/queue/job';
import { REPLAY_QUEUE, type ReplayJob, replayActiveOrders } from '../src/lib/server/rules';

/**
 * After a rule set is published or an agent is edited: re-evaluates every active order's latest
 * assessment (or the agent's orders) against the active rule set. One replay at a time ('singleton'):
 * a publish during a replay queues another, which reads the newest active version when it starts.
 */
export const rulesReplay: JobDefinition<ReplayJob> = {
	name: QUEUES.rulesReplay,
	queue: REPLAY_QUEUE,
	work: { batchSize: 1, pollingIntervalSeconds: 1 },
	async handler(jobs) {
		// one job per fetch (batchSize 1); its summary is the job's output (pg-boss keeps an object as it is)
		let summary: object = {};
		for (const job of jobs) {
			const result = await replayActiveOrders({ agentId: job.data.agentId });
			logger.info('rules replayed', {
				reason: job.data.reason,
				agentId: job.data.agentId ?? null,
				ruleVersion: result.ruleVersion,
				orders: result.orders,
				opened: result.totals.opened,
				superseded: result.totals.superseded,
				refreshed: result.totals.refreshed,
				ms: result.ms
			});
			summary = {
				ruleVersion: result.ruleVersion,
				orders: result.orders,
				totals: result.totals,
				byRule: result.byRule,
				stoppedSuperseded: result.stoppedSuperseded,
				ms: result.ms
			};
		}
		return summary;
	}
};
