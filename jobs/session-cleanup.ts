import { lt } from 'drizzle-orm';
import { getDb } from '../src/lib/server/db';
import { sessions } from '../src/lib/server/db/schema';
import { QUEUES } from '../src/lib/server/queue';
import { DEFAULT_RETRY, type JobDefinition } from '../src/lib/server/queue/job';

/** Hourly: removes expired sign-in sessions. */
export const sessionCleanup: JobDefinition = {
	name: QUEUES.sessionCleanup,
	queue: { ...DEFAULT_RETRY, policy: 'singleton' },
	schedule: { cron: '17 * * * *' },
	async handler() {
		const removed = await getDb().delete(sessions).where(lt(sessions.expiresAt, new Date())).returning({ id: sessions.id });
		return { removed: removed.length };
	}
};
