import { wakeAllDue } from '../src/lib/server/flags';
import { DEFAULT_RETRY, QUEUES, type JobDefinition } from '../src/lib/server/queue';

/** Every minute: flags snoozed until a time that has passed go back on the triage board. */
export const flagWake: JobDefinition = {
	name: QUEUES.flagWake,
	queue: { ...DEFAULT_RETRY, policy: 'singleton' },
	schedule: { cron: '* * * * *' },
	async handler() {
		return { woke: await wakeAllDue(new Date()) };
	}
};
