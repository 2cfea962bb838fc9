// How every part of Ebbline enqueues work: name the queue and the data, and pass the caller's
// transaction when the job must be committed (or rolled back) with the data it concerns. Each queue's
// policy (retry, expiry, singleton rules) belongs to its file in jobs/; the process's entry hands those
// definitions over with useJobs(), so a queue is created with its own policy the first time it is
// needed (pg-boss drops a job whose queue does not exist yet: a fresh database before the workers start).
// Queuing also notifies the queue's workers, delivered when the transaction commits (wake.js).
import type PgBoss from 'pg-boss';
import { sql, type SQL } from 'drizzle-orm';
import type { DbOrTx } from '../db';
import { getBoss } from './boss';
import { DEAD_LETTER_QUEUE, type JobDefinition, type QueueName } from './job';
import { WAKE_CHANNEL } from './wake.js';

type Definitions = () => Promise<readonly Pick<JobDefinition, 'name' | 'queue'>[]>;

let loadDefinitions: Definitions | undefined;
const ready = new Map<string, Promise<void>>();

/** Where this process finds each queue's policy: jobs/registry.ts, passed in by the entry (hooks.server.ts, jobs/worker.ts). */
export function useJobs(definitions: Definitions) {
	loadDefinitions = definitions;
	ready.clear();
}

/** Creates the dead-letter queue and `definition`'s queue with its policy, unless they exist (the workers update it). */
export async function createQueue(boss: PgBoss, definition: Pick<JobDefinition, 'name' | 'queue'>) {
	await boss.createQueue(DEAD_LETTER_QUEUE, { name: DEAD_LETTER_QUEUE, retentionDays: 14 } as PgBoss.Queue);
	const queue = { name: definition.name, deadLetter: DEAD_LETTER_QUEUE, ...definition.queue };
	await boss.createQueue(definition.name, queue);
	return queue;
}

/** The started client, with `name`'s queue (and pg-boss's schema) in place. */
export async function ensureQueue(name: QueueName): Promise<PgBoss> {
	const boss = await getBoss();
	let queue = ready.get(name);
	if (!queue) {
		queue = (async () => {
			if (!loadDefinitions)
				throw new Error(`The ${name} queue has no policy here: the process's entry must pass jobs/registry.ts to useJobs() before sending.`);
			const definition = (await loadDefinitions()).find((d) => d.name === name);
			if (!definition) throw new Error(`No job in jobs/registry.ts works the ${name} queue.`);
			await createQueue(boss, definition);
		})();
		ready.set(name, queue);
		queue.catch(() => ready.delete(name));
	}
	await queue;
	return boss;
}

export type SendOptions = {
	/** the caller's transaction: the job is committed with it, and never sent if it rolls back */
	tx?: DbOrTx;
	/** with a 'short' queue, at most one job per key waits; a second is dropped (send returns null) */
	singletonKey?: string;
};

/**
 * Enqueues one job and returns its id. A job without a singleton key that pg-boss does not accept is
 * an error (the caller's transaction then rolls back); with a key, null means one is already waiting.
 */
export async function send(queue: QueueName, data: object, options: SendOptions = {}): Promise<string | null> {
	const boss = await ensureQueue(queue);
	const id = await boss.send(queue, data, { singletonKey: options.singletonKey, db: options.tx ? inTransaction(options.tx) : undefined });
	if (!id && options.singletonKey === undefined) throw new Error(`The ${queue} queue did not accept the job.`);
	if (id) {
		if (options.tx) await wakeOnCommit(options.tx, queue);
		else await boss.getDb().executeSql('select pg_notify($1, $2)', [WAKE_CHANNEL, queue]);
	}
	return id;
}

/** Enqueues many jobs in one statement per 5,000, in the caller's transaction; jobs dropped by their singleton key are not reported. */
export async function sendMany(queue: QueueName, jobs: readonly { data: object; singletonKey?: string }[], options: { tx: DbOrTx }) {
	const boss = await ensureQueue(queue);
	for (let i = 0; i < jobs.length; i += 5000) {
		await boss.insert(
			jobs.slice(i, i + 5000).map((job) => ({ name: queue, data: job.data, singletonKey: job.singletonKey })),
			{ db: inTransaction(options.tx) }
		);
	}
	if (jobs.length > 0) await wakeOnCommit(options.tx, queue);
}

/**
 * Tells the workers of `queue` (in every process) to look for work once the caller's transaction
 * commits: PostgreSQL delivers a notification only then, and not at all on rollback (wake.js).
 */
export async function wakeOnCommit(tx: DbOrTx, queue: QueueName) {
	await tx.execute(sql`select pg_notify(${WAKE_CHANNEL}, ${queue})`);
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
function inTransaction(tx: DbOrTx): PgBoss.Db {
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
