import type { EventEmitter } from 'node:events';
import PgBoss from 'pg-boss';
import { requireEnv } from '../config';
import { logger } from '../logger';

let boss: PgBoss | undefined;
let starting: Promise<PgBoss> | undefined;

export function createBoss(connectionString = requireEnv('DATABASE_URL')) {
	const instance = new PgBoss({ connectionString, schema: 'pgboss', max: Number(process.env.PGBOSS_POOL_MAX ?? 6) });
	instance.on('error', (error) => logger.error('queue error', { error: error.message }));
	// pg-boss as patched in scripts/patches: a worked batch that could not be marked completed or failed
	(instance as unknown as EventEmitter).on('warning', (warning: { message: string; error?: string }) => logger.warn(warning.message, { error: warning.error }));
	return instance;
}

/** The process-wide pg-boss client, started on first use (sending only; workers register in jobs/worker.ts). */
export function getBoss(): Promise<PgBoss> {
	starting ??= (async () => {
		boss = createBoss();
		await boss.start();
		return boss;
	})();
	return starting;
}

export async function stopBoss() {
	if (boss) {
		await boss.stop({ graceful: true, wait: true, timeout: 2_000 });
		boss = undefined;
		starting = undefined;
	}
}
