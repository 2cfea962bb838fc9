// Create and drop databases on the cluster; needs the `postgres` package, so call after ensureDependencies().
export async function withAdmin(adminUrl, fn) {
	const { default: postgres } = await import('postgres');
	const sql = postgres(adminUrl, { max: 1, onnotice: () => {} });
	try {
		return await fn(sql);
	} finally {
		await sql.end({ timeout: 5 });
	}
}

/** Creates the database when missing (owned by `owner` when given); returns whether it was created. */
export async function createDatabaseIfMissing(adminUrl, name, { owner } = {}) {
	return withAdmin(adminUrl, async (sql) => {
		const rows = await sql`select 1 from pg_database where datname = ${name}`;
		if (rows.length === 0) await sql.unsafe(`create database "${name}"${owner ? ` owner "${owner}"` : ''}`);
		return rows.length === 0;
	});
}

/**
 * The owner and app roles (postgres.mjs's ROLES) on a cluster Ebbline runs, with the passwords it keeps
 * beside the superuser's. `cluster` is what ensurePostgres() or startThrowawayPostgres() returned.
 */
export async function ensureClusterRoles(cluster) {
	const { ROLES } = await import('./postgres.mjs');
	const { ensureRoles } = await import('./db-roles.mjs');
	await withAdmin(cluster.url('postgres'), (sql) =>
		ensureRoles(sql, {
			owner: { name: ROLES.owner, password: cluster.rolePassword(ROLES.owner) },
			app: { name: ROLES.app, password: cluster.rolePassword(ROLES.app) }
		})
	);
}

/** A database made before the roles (an earlier npm start's, owned by the superuser) handed to them; a no-op after. */
export async function adoptClusterDatabase(cluster, database) {
	const { ROLES } = await import('./postgres.mjs');
	const { adoptDatabase } = await import('./db-roles.mjs');
	return withAdmin(cluster.url(database), (sql) => adoptDatabase(sql, ROLES));
}

export async function dropDatabase(adminUrl, name) {
	return withAdmin(adminUrl, (sql) => sql.unsafe(`drop database if exists "${name}" with (force)`));
}
