// The database the backup and restore commands work on: DATABASE_URL when set (as the owner role,
// DATABASE_OWNER_URL, when that is set too), otherwise a database on the private cluster `npm start`
// runs in .data/postgres (started for the command and stopped again when the command started it), as
// its owner role. `appUrl` is the app role's login to the same database (the grants after a restore).
import type { Sql } from 'postgres';
import { adoptClusterDatabase, createDatabaseIfMissing, ensureClusterRoles, withAdmin } from './database.mjs';
import { ensurePostgres, ROLES } from './postgres.mjs';
import { ownerDatabaseUrl } from '../../src/lib/server/config';

export type DatabaseTarget = { url: string; appUrl: string; description: string; release: () => void };

export async function databaseTarget(options: { database?: string; create?: boolean } = {}): Promise<DatabaseTarget> {
	const fromEnv = process.env.DATABASE_URL;
	if (fromEnv) {
		if (options.database) throw new Error('--into names a database on the private cluster; with DATABASE_URL set, point DATABASE_URL at the database instead.');
		const owner = ownerDatabaseUrl();
		const url = new URL(owner);
		const as = owner === fromEnv ? 'DATABASE_URL' : `DATABASE_OWNER_URL, as ${decodeURIComponent(url.username)}`;
		return { url: owner, appUrl: fromEnv, description: `${url.pathname.slice(1)} on ${url.hostname}:${url.port || 5432} (${as})`, release: () => {} };
	}
	const name = options.database ?? 'ebbline';
	if (!/^[a-z_][a-z0-9_]{0,62}$/.test(name)) throw new Error(`--into ${name}: use lower-case letters, digits and _ for a database name.`);
	const postgres = ensurePostgres();
	const release = () => {
		if (postgres.startedHere) postgres.stop();
	};
	try {
		await ensureClusterRoles(postgres);
		if (options.create) await createDatabaseIfMissing(postgres.url('postgres'), name, { owner: ROLES.owner });
		else {
			const exists = await withAdmin(postgres.url('postgres'), (sql: Sql) => sql`select 1 from pg_database where datname = ${name}`);
			if (exists.length === 0) throw new Error(`The private cluster has no database ${name} yet: run npm start once, or set DATABASE_URL.`);
		}
		await adoptClusterDatabase(postgres, name);
	} catch (error) {
		release();
		throw error;
	}
	return {
		url: postgres.roleUrl(ROLES.owner, name),
		appUrl: postgres.roleUrl(ROLES.app, name),
		description: `${name} on the private cluster (.data/postgres, port ${postgres.port}, as ${ROLES.owner})`,
		release
	};
}
