import { drizzle } from 'drizzle-orm/postgres-js';
import postgres from 'postgres';
import * as schema from './schema';
import { requireEnv } from '../config';

export type Database = ReturnType<typeof createDatabase>;
/** A transaction handle from db.transaction(); services accept either. */
export type Tx = Parameters<Parameters<Database['transaction']>[0]>[0];
export type DbOrTx = Database | Tx;

export function createDatabase(url: string, options: { max?: number } = {}) {
	const client = postgres(url, {
		max: options.max ?? 10,
		onnotice: () => {},
		// A restarted or briefly unreachable database must not leave the process with dead sockets.
		idle_timeout: 30,
		connect_timeout: 10
	});
	return Object.assign(drizzle(client, { schema, casing: 'snake_case' }), { $client: client });
}

let instance: Database | undefined;

/** The process-wide database handle, created on first use from DATABASE_URL. */
export function getDb(): Database {
	instance ??= createDatabase(requireEnv('DATABASE_URL'), {
		max: Number(process.env.DATABASE_POOL_MAX ?? 10)
	});
	return instance;
}

export async function closeDb() {
	if (instance) {
		await instance.$client.end({ timeout: 5 });
		instance = undefined;
	}
}

export { schema };
