import { DEFAULT_RETRY, QUEUES, type JobDefinition } from '../src/lib/server/queue';
import { secondFactor, sessions as session } from '../src/lib/server/auth';

/** Hourly: removes sign-in sessions past their sliding expiry or their absolute lifetime, and second-step challenges past theirs. */
export const sessionCleanup: JobDefinition = {
	name: QUEUES.sessionCleanup,
	queue: { ...DEFAULT_RETRY, policy: 'singleton' },
	schedule: { cron: '17 * * * *' },
	async handler() {
		return { removed: await session.removeExpired(), challengesRemoved: await secondFactor.removeExpiredChallenges() };
	}
};
