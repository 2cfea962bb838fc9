import { remindDue } from '../src/lib/server/recommendations';
import { QUEUES } from '../src/lib/server/queue';
import { DEFAULT_RETRY, type JobDefinition } from '../src/lib/server/queue/job';

/** Every 10 minutes: one reminder for each recommendation unanswered after the configured hours. */
export const recommendationRemind: JobDefinition = {
	name: QUEUES.recommendationRemind,
	queue: { ...DEFAULT_RETRY, policy: 'singleton' },
	schedule: { cron: '*/10 * * * *' },
	async handler() {
		return { reminded: await remindDue() };
	}
};
