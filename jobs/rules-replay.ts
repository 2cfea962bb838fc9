import { logger } from '../src/lib/server/logger';
import { DEFAULT_RETRY, QUEUES, type JobDefinition } from '../src/lib/server/queue';
import { type ReplayJob, replayActiveOrders } from '../src/lib/server/rules';

/**
 * After a rule set is published or an agent is edited: re-evaluates every active order's latest
 * assessment (or the agent's orders) against the active rule set. One replay at a time ('singleton'):
 * a publish during a replay queues another, which reads the newest active version when it starts.
 */
export const rulesReplay: JobDefinition<ReplayJob> = {
	name: QUEUES.rulesReplay,
	// one replay at a time; a long replay of a large hospital gets 15 minutes before it is retried
	queue: { ...DEFAULT_RETRY, policy: 'singleton', expireInSeconds: 15 * 60 },
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
