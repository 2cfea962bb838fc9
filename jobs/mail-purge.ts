import { DEFAULT_RETRY, QUEUES, type JobDefinition } from '../src/lib/server/queue';
import { retention } from '../src/lib/server/mail';
import * as settings from '../src/lib/server/settings';

/** Nightly: blanks the text of e-mails delivered longer ago than the retention setting (default 30 days); the rows stay. */
export const mailPurge: JobDefinition = {
	name: QUEUES.mailPurge,
	queue: { ...DEFAULT_RETRY, policy: 'singleton' },
	schedule: { cron: '45 3 * * *' },
	async handler() {
		const days = (await settings.get()).emailRetentionDays;
		return { retentionDays: days, removed: await retention.purgeBodies(days) };
	}
};
