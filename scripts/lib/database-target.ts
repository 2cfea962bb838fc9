// The database the backup and restore commands work on: DATABASE_URL when set, otherwise a database on
// the private cluster `npm start` runs in .data/postgres (started for the command and stopped again
// when the command started it).
import type { Sql } from 'postgres';
import { createDatabaseIfMissing, withAdmin } from './database.mjs';
import { ensurePostgres } from './postgres.mjs';

export type DatabaseTarget = { url: string; description: string; release: () => void };

export async function databaseTarget(options: { database?: string; create?: boolean } = {}): Promise<DatabaseTarget> {
	const fromEnv = process.env.DATABASE_URL;
	if (fromEnv) {
		if (options.database) throw new Error('--into names a database on the private cluster; with DATABASE_URL set, point DATABASE_URL at the database instead.');
		const url = new URL(fromEnv);
		return { url: fromEnv, description: `${url.pathname.slice(1)} on ${url.hostname}:${url.port || 5432} (DATABASE_URL)`, release: () => {} };
	}
	const name = options.database ?? 'ebbline';
	if (!/^[a-z_][a-z0-9_]{0,62}$/.test(name)) throw new Error(`--into ${name}: use lower-case letters, digits and _ for a database name.`);
	const postgres = ensurePostgres();
	const release = () => {
		if (postgres.startedHere) postgres.stop();
	};
	try {
		if (options.create) await createDatabaseIfMissing(postgres.url('postgres'), name);
		else {
			const exists = await withAdmin(postgres.url('postgres'), (sql: Sql) => sql`select 1 from pg_database where datname = ${name}`);
			if (exists.length === 0) throw new Error(`The private cluster has no database ${name} yet: run npm start once, or set DATABASE_URL.`);
		}
	} catch (error) {
		release();
		throw error;
	}
	return { url: postgres.url(name), description: `${name} on the private cluster (.data/postgres, port ${postgres.port})`, release };
}
