import { config } from '../config';
import { closeDb } from '../db';
import { stopBoardCache } from '../flags';
import { logger } from '../logger';
import { stopBoss } from './boss';
import type { JobDefinition } from './job';
import { useJobs } from './send';

/** What jobs/worker.ts offers the entry that starts it. */
export type Workers = {
	jobs: readonly JobDefinition[];
	startWorkers: () => Promise<unknown>;
	stopWorkers: () => Promise<void>;
};

/**
 * Every step bounds its own wait (workers 5 s, the queue's sender, the listeners and the pool 2 s
 * each); past this the stop is stuck, and the process says on which step and ends with code 1 rather
 * than wait for a service manager's SIGKILL.
 */
export const SHUTDOWN_DEADLINE_MS = 13_000;
/** after every client is closed, the longest anything else may keep the process alive, ms */
export const SHUTDOWN_LINGER_MS = 1_000;

type StopStep = readonly [name: string, stop: () => Promise<void>];

/**
 * Runs the stop steps in order, logging each one's duration. A step that never returns, or a handle
 * left open after the last step, is named in the log (with Node's list of active resources) before
 * the process ends; the timers are unref'd, so they fire only when something else holds the process.
 */
export async function runShutdown(steps: readonly StopStep[], exit: (code: number) => void = (code) => process.exit(code)) {
	const started = Date.now();
	let current = steps[0]?.[0] ?? 'none';
	const resources = () => process.getActiveResourcesInfo().join(',');
	const deadline = setTimeout(() => {
		logger.error('shutdown overran its deadline', { step: current, elapsedMs: Date.now() - started, resources: resources() });
		exit(1);
	}, SHUTDOWN_DEADLINE_MS).unref();
	for (const [name, stop] of steps) {
		current = name;
		const stepStarted = Date.now();
		try {
			await stop();
		} catch (error) {
			logger.warn('shutdown step failed', { step: name, error: (error as Error).message });
		}
		logger.info('shutdown step done', { step: name, ms: Date.now() - stepStarted });
	}
	clearTimeout(deadline);
	logger.info('shutdown done', { ms: Date.now() - started });
	setTimeout(() => {
		logger.warn('still held open after shutdown', { resources: resources() });
		exit(0);
	}, SHUTDOWN_LINGER_MS).unref();
}

/**
 * Starts the pg-boss workers inside the web process (the default on one machine). With
 * EBBLINE_WORKERS=off the same handlers run in separate processes via `npm run worker`, and this
 * process only sends. Either way the senders learn each queue's policy from the jobs passed in, and a
 * stopping web process lets its jobs finish and closes its queue, board-cache and database clients.
 * `load` is the entry's import of jobs/worker.ts (loaded here, after the server has started).
 */
export async function startEmbeddedWorkers(load: () => Promise<Workers>) {
	if (process.env.VITEST) return;
	const workers = load();
	useJobs(async () => (await workers).jobs);
	const { startWorkers, stopWorkers } = await workers;
	if (config.workers === 'embedded') await startWorkers();
	// adapter-node emits this after it stops accepting requests. The sending client's timers would
	// keep the process alive, so it is stopped too; then the pool closes and the process exits.
	process.once('sveltekit:shutdown' as 'exit', () =>
		runShutdown([
			['board cache', stopBoardCache],
			['workers', stopWorkers],
			['queue sender', stopBoss],
			['database pool', closeDb]
		])
	);
}
