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

export async function createDatabaseIfMissing(adminUrl, name) {
	return withAdmin(adminUrl, async (sql) => {
		const rows = await sql`select 1 from pg_database where datname = ${name}`;
		if (rows.length === 0) await sql.unsafe(`create database "${name}"`);
		return rows.length === 0;
	});
}

export async function dropDatabase(adminUrl, name) {
	return withAdmin(adminUrl, (sql) => sql.unsafe(`drop database if exists "${name}" with (force)`));
}
