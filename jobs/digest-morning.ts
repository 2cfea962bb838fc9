import { config } from '../src/lib/server/config';
import { queueMorningDigest } from '../src/lib/server/notifications';
import { DEFAULT_RETRY, QUEUES, type JobDefinition } from '../src/lib/server/queue';
import * as settings from '../src/lib/server/settings';

/**
 * The pharmacists' morning digest, at the administrator's cron time (default 07:00) in the hospital's
 * time zone. The time lives in the settings table, so the schedule is read when the worker starts and
 * updated by the settings page when it changes.
 */
export const digestMorning: JobDefinition = {
	name: QUEUES.digestMorning,
	queue: { ...DEFAULT_RETRY, policy: 'singleton' },
	async resolveSchedule() {
		const { digestCron } = await settings.get();
		return { cron: digestCron, tz: config.hospitalTimeZone };
	},
	async handler() {
		return queueMorningDigest();
	}
};
