// Applies the committed drizzle/ migrations as the owner role (DATABASE_OWNER_URL, or DATABASE_URL
// where one role does both), then the grants step: the app role (DATABASE_URL's user) gets exactly its
// declared rights on every table, so a new migration's table is usable by the app without hand work.
import { migrate } from 'drizzle-orm/postgres-js/migrator';
import PgBoss from 'pg-boss';
import postgres from 'postgres';
import { grantAppRole } from './lib/db-roles.mjs';
import { createDatabase } from '../src/lib/server/db';
import { ownerDatabaseUrl, requireEnv } from '../src/lib/server/config';

/** The role a URL logs in as, asked of the server (a managed server may spell user names its own way). */
async function roleOf(url: string): Promise<string> {
	const sql = postgres(url, { max: 1, onnotice: () => {}, connect_timeout: 10 });
	try {
		const [{ role }] = await sql`select current_user as role`;
		return role as string;
	} finally {
		await sql.end({ timeout: 5 });
	}
}

/** The grants step on its own (after a restore, say); idempotent. Returns what it changed. */
export async function grantApp(ownerUrl = ownerDatabaseUrl(), appUrl = requireEnv('DATABASE_URL')) {
	const appRole = ownerUrl === appUrl ? null : await roleOf(appUrl);
	const sql = postgres(ownerUrl, { max: 1, onnotice: () => {}, connect_timeout: 10 });
	try {
		if (!appRole) return { singleRole: true, changed: [] as string[] };
		const queueSchemaSql = PgBoss.getConstructionPlans('pgboss');
		return (await grantAppRole(sql, appRole, { queueSchemaSql })) as { singleRole: boolean; changed: string[] };
	} finally {
		await sql.end({ timeout: 5 });
	}
}

export async function migrateDatabase(ownerUrl = ownerDatabaseUrl(), appUrl = requireEnv('DATABASE_URL')) {
	const db = createDatabase(ownerUrl, { max: 1 });
	try {
		await migrate(db, { migrationsFolder: new URL('../drizzle', import.meta.url).pathname });
	} finally {
		await db.$client.end({ timeout: 5 });
	}
	return grantApp(ownerUrl, appUrl);
}

if (import.meta.url === `file://${process.argv[1]}`) {
	migrateDatabase()
		.then(({ singleRole, changed }) => {
			console.log('[ebbline] migrations applied');
			if (singleRole) console.log('[ebbline] one role owns the tables and runs the app (no DATABASE_OWNER_URL): no grants to apply');
			else if (changed.length > 0)
				console.log(`[ebbline] app role's rights set: ${changed.length > 6 ? `${changed.length} tables and schemas` : changed.join('; ')}`);
		})
		.catch((error) => {
			console.error('[ebbline] migration failed:', error.message);
			process.exitCode = 1;
		});
}
