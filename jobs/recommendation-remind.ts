import { escalateDue, remindDue } from '../src/lib/server/recommendations';
import { DEFAULT_RETRY, QUEUES, type JobDefinition } from '../src/lib/server/queue';

/**
 * Every 10 minutes: reminds physicians of unanswered recommendations (at most two reminders, each
 * after the configured hours), then tells the sender about those still unanswered after the second.
 */
export const recommendationRemind: JobDefinition = {
	name: QUEUES.recommendationRemind,
	queue: { ...DEFAULT_RETRY, policy: 'singleton' },
	schedule: { cron: '*/10 * * * *' },
	async handler() {
		const now = new Date();
		const reminded = await remindDue(now);
		const escalated = await escalateDue(now);
		return { reminded, escalated };
	}
};
