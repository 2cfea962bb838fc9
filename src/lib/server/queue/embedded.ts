import { config } from '../config';

/**
 * Starts the pg-boss workers inside the web process (the default on one machine). With
 * EBBLINE_WORKERS=off the same handlers run in separate processes via `npm run worker`.
 * Either way, a stopping web process lets its jobs finish and closes its queue, board-cache and
 * database clients.
 */
export async function startEmbeddedWorkers() {
	if (process.env.VITEST) return;
	const { startWorkers, stopWorkers } = await import('../../../../jobs/worker');
	const { closeDb } = await import('../db');
	const { stopBoss } = await import('./index');
	const { stopBoardCache } = await import('../flags/board-cache');
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
