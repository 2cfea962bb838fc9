import { drizzle } from 'drizzle-orm/postgres-js';
import postgres from 'postgres';
import * as schema from './schema';
import { requireEnv } from '../config';

export type Database = ReturnType<typeof createDatabase>;
/** A transaction handle from db.transaction(); services accept either. */
export type Tx = Parameters<Parameters<Database['transaction']>[0]>[0];
export type DbOrTx = Database | Tx;

/**
 * `asyncCommit`: commit without waiting for the disk (PostgreSQL's synchronous_commit off). Only for
 * work that can be redone from the start after a crash, such as seeding the demo; never for the app.
 */
export function createDatabase(url: string, options: { max?: number; asyncCommit?: boolean } = {}) {
	const client = postgres(url, {
		max: options.max ?? 10,
		// No JIT compilation: Ebbline's queries run in milliseconds to a second, and compiling them costs more
		// than it saves (the scale bench: the 12-month report 3.5 s with JIT, 1.7 s without).
		connection: { jit: 'off', ...(options.asyncCommit ? { synchronous_commit: 'off' } : {}) },
		onnotice: () => {},
		// A restarted or briefly unreachable database must not leave the process with dead sockets.
		idle_timeout: 30,
		connect_timeout: 10
	});
	return Object.assign(drizzle(client, { schema, casing: 'snake_case' }), { $client: client });
}

let instance: Database | undefined;
let asyncCommit = false;

/** Before the first getDb(): this process's work can be redone after a crash (the demo seed), so it need not wait for the disk. */
export function useAsyncCommit() {
	if (instance) throw new Error('useAsyncCommit() must come before the first getDb()');
	asyncCommit = true;
}

/** The process-wide database handle, created on first use from DATABASE_URL. */
export function getDb(): Database {
	instance ??= createDatabase(requireEnv('DATABASE_URL'), {
		max: Number(process.env.DATABASE_POOL_MAX ?? 10),
		asyncCommit
	});
	return instance;
}

export async function closeDb() {
	if (instance) {
		await instance.$client.end({ timeout: 2 });
		instance = undefined;
	}
}

export { schema };
