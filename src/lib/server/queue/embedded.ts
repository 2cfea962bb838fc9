import { config } from '../config';
import { closeDb } from '../db';
import { stopBoardCache } from '../flags';
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
	process.once('sveltekit:shutdown' as 'exit', async () => {
		await stopBoardCache();
		await stopWorkers();
		await stopBoss();
		await closeDb();
	});
}
