import type { EventEmitter } from 'node:events';
import PgBoss from 'pg-boss';
import { sql, type SQL } from 'drizzle-orm';
import { requireEnv } from '../config';
import { logger } from '../logger';
import type { DbOrTx } from '../db';

/** Every queue's name, in one place. */
export const QUEUES = {
	orderReassess: 'order.reassess',
	rulesReplay: 'rules.replay',
	feedSimulate: 'feed.simulate',
	mailSend: 'mail.send',
	recommendationRemind: 'recommendation.remind',
	recommendationSweep: 'recommendation.sweep',
	flagWake: 'flag.wake',
	digestMorning: 'digest.morning',
	sessionCleanup: 'session.cleanup',
	backupNightly: 'backup.nightly'
} as const;
export type QueueName = (typeof QUEUES)[keyof typeof QUEUES];

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
		await boss.stop({ graceful: true, wait: true, timeout: 10_000 });
		boss = undefined;
		starting = undefined;
	}
}

/**
 * A pg-boss parameter as postgres.js needs it: NULL for unset options, and a job's data object as JSON
 * text (node-postgres, which pg-boss is written for, serialises plain objects itself; postgres.js does not).
 */
function asParameter(value: unknown): unknown {
	if (value === undefined || value === null) return null;
	if (typeof value === 'object' && !(value instanceof Date) && !Array.isArray(value) && !ArrayBuffer.isView(value)) return JSON.stringify(value);
	return value;
}

/**
 * pg-boss's `db` option bound to a Drizzle transaction, so a job is enqueued in the same transaction
 * as the data it concerns: if the transaction rolls back, the job was never sent.
 */
export function inTransaction(tx: DbOrTx): PgBoss.Db {
	return {
		async executeSql(text: string, values: unknown[]) {
			const parts = text.split(/\$(\d+)/);
			const chunks: SQL[] = [];
			// pg-boss passes undefined for unset options; Drizzle would drop such a parameter entirely, so send NULL
			parts.forEach((part, i) => chunks.push(i % 2 === 0 ? sql.raw(part) : sql`${asParameter(values[Number(part) - 1])}`));
			const result = await tx.execute(sql.join(chunks, sql.raw('')));
			return { rows: Array.from(result as unknown as Iterable<unknown>) };
		}
	};
}
