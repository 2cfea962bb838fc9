import { config } from '../src/lib/server/config';
import { simulateTick, simulatorEveryMinutes, type TickSummary } from '../src/lib/server/demo';
import { QUEUES, type JobDefinition } from '../src/lib/server/queue';

/**
 * The demo simulator: every EBBLINE_SIMULATOR_EVERY minutes (default 2) plays Larkspur Bay Hospital
 * forward through the feed. Scheduled only with EBBLINE_SIMULATOR=on (`npm start`); a schedule left
 * from an earlier run is removed when the simulator is off.
 */
export const feedSimulate: JobDefinition = {
	name: QUEUES.feedSimulate,
	// one tick at a time; a failed tick is not retried (the next one follows in minutes)
	queue: { policy: 'singleton', retryLimit: 0, expireInSeconds: 300 },
	schedule: config.simulator ? { cron: `*/${simulatorEveryMinutes()} * * * *` } : undefined,
	async handler(_jobs, boss): Promise<TickSummary | { skipped: string }> {
		if (!config.simulator) {
			await boss.unschedule(QUEUES.feedSimulate);
			return { skipped: 'EBBLINE_SIMULATOR is not on' };
		}
		return simulateTick();
	}
};
