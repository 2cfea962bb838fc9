import { config } from '../config';

/**
 * Starts the pg-boss workers inside the web process (the default on one machine). With
 * EBBLINE_WORKERS=off the same handlers run in separate processes via `npm run worker`.
 */
export async function startEmbeddedWorkers() {
	if (config.workers !== 'embedded' || process.env.VITEST) return;
	const { startWorkers } = await import('../../../../jobs/worker');
	await startWorkers();
}
