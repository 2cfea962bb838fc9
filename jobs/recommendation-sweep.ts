import { withdrawStale } from '../src/lib/server/recommendations';
import { DEFAULT_RETRY, QUEUES, type JobDefinition } from '../src/lib/server/queue';

/**
 * Every 5 minutes: withdraws recommendations whose order stopped or changed, or whose patient was
 * discharged, before the physician answered. Re-assessment does the same for the orders it touches;
 * this sweep catches what arrives another way (a discharge, an edit while no job ran).
 */
export const recommendationSweep: JobDefinition = {
	name: QUEUES.recommendationSweep,
	queue: { ...DEFAULT_RETRY, policy: 'singleton' },
	schedule: { cron: '*/5 * * * *' },
	async handler() {
		const { withdrawn } = await withdrawStale(new Date());
		return { withdrawn };
	}
};
