import { config } from '../config';

/**
 * Starts the pg-boss workers inside the web process (the default on one machine). With
 * EBBLINE_WORKERS=off the same handlers run in separate processes via `npm run worker`.
 */
export async function startEmbeddedWorkers() {
	if (config.workers !== 'embedded' || process.env.VITEST) return;
	const { startWorkers, stopWorkers } = await import('../../../../jobs/worker');
	const { closeDb } = await import('../db');
	await startWorkers();
	// adapter-node emits this after it stops accepting requests; let jobs finish, then close the pool
	// so the process exits by itself.
	process.once('sveltekit:shutdown' as 'exit', async () => {
		await stopWorkers();
		await closeDb();
	});
}
