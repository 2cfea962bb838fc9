// Ebbline's two database roles: the owner (owns the public and drizzle schemas' objects; runs the
// migrations, `seed --reset` and restores) and the app (what the web process and the workers connect
// as: reads and writes rows, never changes tables, triggers or functions). The app role owns the
// pgboss schema: pg-boss 10 creates a table per queue at run time (pgboss.create_queue: CREATE TABLE …,
// then ALTER TABLE pgboss.job ATTACH PARTITION, which only pgboss.job's owner may do) and upgrades its
// own tables when it starts, so whoever runs the queue must own them; the queue holds no record the
// app must not change. Plain JavaScript with the `postgres` client passed in, so that scripts/migrate.ts,
// the private cluster's set-up (stack.mjs) and the tests share it.

/** What the app may do on a table in public: rows in and out, nothing else (no TRUNCATE, REFERENCES, TRIGGER). */
export const APP_TABLE_PRIVILEGES = ['SELECT', 'INSERT', 'UPDATE', 'DELETE'];

/**
 * Tables the app may only append to and read. Their triggers refuse changes too, but an owner could
 * drop a trigger; the app is not the owner and has no UPDATE, DELETE or TRUNCATE on them. The access
 * log's 400-day retention (its trigger lets older rows go) is run by the owner: no job of the app's
 * deletes from it.
 */
export const APPEND_ONLY_TABLES = ['audit_log', 'access_log'];

/** The privileges the app role is declared to hold on a table in public. */
export function declaredTablePrivileges(table) {
	return APPEND_ONLY_TABLES.includes(table) ? ['SELECT', 'INSERT'] : APP_TABLE_PRIVILEGES;
}

const ident = (name) => `"${String(name).replaceAll('"', '""')}"`;
const literal = (text) => `'${String(text).replaceAll("'", "''")}'`;

/**
 * Hands every object in `schema` (the schema itself, its tables, views, free-standing sequences,
 * functions and enum or domain types) to `role`, when someone else owns it. The caller must own them
 * and be allowed to act as `role`. Returns how many objects changed hands.
 */
export async function handOverSchema(sql, schema, role, { includeSchema = true } = {}) {
	const [present] = await sql`select pg_get_userbyid(nspowner) as owner from pg_namespace where nspname = ${schema}`;
	if (!present) return 0;
	let changed = 0;
	if (includeSchema && present.owner !== role) {
		await sql.unsafe(`alter schema ${ident(schema)} owner to ${ident(role)}`);
		changed++;
	}
	const relations = await sql`
		select c.relname as name, c.relkind as kind from pg_class c join pg_namespace n on n.oid = c.relnamespace
		where n.nspname = ${schema} and c.relkind in ('r', 'p', 'v', 'm', 'S') and pg_get_userbyid(c.relowner) <> ${role}
		  -- a sequence behind a serial column goes with its table
		  and (c.relkind <> 'S' or not exists (select 1 from pg_depend d where d.classid = 'pg_class'::regclass and d.objid = c.oid and d.deptype in ('a', 'i')))
		order by c.relkind, c.relname`;
	for (const r of relations) {
		const what = r.kind === 'S' ? 'sequence' : r.kind === 'v' ? 'view' : r.kind === 'm' ? 'materialized view' : 'table';
		await sql.unsafe(`alter ${what} ${ident(schema)}.${ident(r.name)} owner to ${ident(role)}`);
		changed++;
	}
	const functions = await sql`
		select p.oid::regprocedure::text as signature, p.prokind as kind from pg_proc p join pg_namespace n on n.oid = p.pronamespace
		where n.nspname = ${schema} and pg_get_userbyid(p.proowner) <> ${role}`;
	for (const f of functions) {
		await sql.unsafe(`alter ${f.kind === 'p' ? 'procedure' : 'routine'} ${f.signature} owner to ${ident(role)}`);
		changed++;
	}
	const types = await sql`
		select t.typname as name from pg_type t join pg_namespace n on n.oid = t.typnamespace
		where n.nspname = ${schema} and t.typtype in ('e', 'd') and pg_get_userbyid(t.typowner) <> ${role}`;
	for (const t of types) {
		await sql.unsafe(`alter type ${ident(schema)}.${ident(t.name)} owner to ${ident(role)}`);
		changed++;
	}
	return changed;
}

/** The app role's privileges on each table in public, as PostgreSQL holds them (granted to it by name). */
export async function appTablePrivileges(sql, appRole) {
	const rows = await sql`
		select c.relname as table, coalesce(array_agg(a.privilege_type order by a.privilege_type) filter (where a.privilege_type is not null), '{}') as privileges
		from pg_class c join pg_namespace n on n.oid = c.relnamespace
		left join lateral aclexplode(coalesce(c.relacl, acldefault('r', c.relowner))) a on a.grantee = (select oid from pg_roles where rolname = ${appRole})
		where n.nspname = 'public' and c.relkind in ('r', 'p', 'v', 'm') and not c.relispartition
		group by c.relname order by c.relname`;
	return Object.fromEntries(rows.map((r) => [r.table, r.privileges]));
}

/**
 * The grants step, run by the owner after every migration (idempotent): the app role may use the
 * public schema, has exactly its declared privileges on every table there (revoking any other),
 * USAGE and SELECT on the sequences, EXECUTE on the functions, read access to the migration history
 * (the nightly backup reads it), and owns the pgboss schema (built with `queueSchemaSql`, pg-boss's
 * construction SQL, when it is not there yet). Default privileges give a table the next
 * migration creates the ordinary rights at once; this step then narrows an append-only one.
 * With one role for both (owner = app) there is nothing to grant. Returns what changed, for the log.
 */
export async function grantAppRole(sql, appRole, { queueSchemaSql } = {}) {
	const [{ owner }] = await sql`select current_user as owner`;
	if (owner === appRole) return { singleRole: true, changed: [] };
	const [app] = await sql`select 1 from pg_roles where rolname = ${appRole}`;
	if (!app) throw new Error(`The app role ${appRole} (the user in DATABASE_URL) does not exist on this server: create it (README, "Database roles").`);
	const changed = [];
	// pg-boss makes its schema with CREATE SCHEMA IF NOT EXISTS, which PostgreSQL refuses without
	// CREATE on the database even when the schema is there: the owner runs pg-boss's own construction
	// SQL (its own transaction) and hands the result to the app below
	const [queue] = await sql`select to_regclass('pgboss.version') is not null as installed`;
	if (!queue.installed && queueSchemaSql) {
		await sql.unsafe(queueSchemaSql);
		changed.push('pgboss: created');
	}
	const app_ = ident(appRole);
	await sql.begin(async (tx) => {
		// nobody but the owner creates objects in public (PostgreSQL 14 and older let everyone)
		await tx.unsafe('revoke create on schema public from public');
		await tx.unsafe(`revoke create on schema public from ${app_}`);
		await tx.unsafe(`grant usage on schema public to ${app_}`);
		const current = await appTablePrivileges(tx, appRole);
		for (const [table, have] of Object.entries(current)) {
			const want = declaredTablePrivileges(table);
			const extra = have.filter((p) => !want.includes(p));
			const missing = want.filter((p) => !have.includes(p));
			if (extra.length > 0) await tx.unsafe(`revoke ${extra.join(', ')} on table public.${ident(table)} from ${app_}`);
			if (missing.length > 0) await tx.unsafe(`grant ${missing.join(', ')} on table public.${ident(table)} to ${app_}`);
			if (extra.length + missing.length > 0) changed.push(`${table}: ${want.join(', ')}`);
		}
		await tx.unsafe(`grant usage, select on all sequences in schema public to ${app_}`);
		await tx.unsafe(`grant execute on all functions in schema public to ${app_}`);
		await tx.unsafe(`alter default privileges for role ${ident(owner)} in schema public grant ${APP_TABLE_PRIVILEGES.join(', ')} on tables to ${app_}`);
		await tx.unsafe(`alter default privileges for role ${ident(owner)} in schema public grant usage, select on sequences to ${app_}`);
		await tx.unsafe(`alter default privileges for role ${ident(owner)} in schema public grant execute on functions to ${app_}`);
		const [drizzle] = await tx`select 1 from pg_namespace where nspname = 'drizzle'`;
		if (drizzle) {
			await tx.unsafe(`grant usage on schema drizzle to ${app_}`);
			await tx.unsafe(`grant select on all tables in schema drizzle to ${app_}`);
			await tx.unsafe(`grant select on all sequences in schema drizzle to ${app_}`);
		}
		// the queue's schema belongs to the app (see the top of this file); made here, so the app needs
		// no CREATE on the database; objects the construction above, a restore or an earlier single-role
		// set-up left with the owner are handed over
		await tx.unsafe(`create schema if not exists pgboss authorization ${app_}`);
		const handed = await handOverSchema(tx, 'pgboss', appRole);
		if (handed > 0) changed.push(`pgboss: ${handed} objects handed to ${appRole}`);
	});
	return { singleRole: false, changed };
}

/**
 * The two roles on a cluster Ebbline runs itself (npm start, npm test), made or brought up to date by
 * its superuser: both log in with a password; the owner may act as the app role (it creates and
 * hands over the pgboss schema). Neither is a superuser or may create roles or databases.
 */
export async function ensureRoles(admin, { owner, app }) {
	for (const role of [app, owner]) {
		const [exists] = await admin`select 1 from pg_roles where rolname = ${role.name}`;
		const options = `login nosuperuser nocreatedb nocreaterole password ${literal(role.password)}`;
		if (exists) await admin.unsafe(`alter role ${ident(role.name)} ${options}`);
		else {
			// two runs of the same checkout may both get here
			await admin.unsafe(`create role ${ident(role.name)} ${options}`).catch((error) => {
				if (error.code !== '42710') throw error;
			});
		}
	}
	const [member] =
		await admin`select 1 from pg_auth_members where roleid = (select oid from pg_roles where rolname = ${app.name}) and member = (select oid from pg_roles where rolname = ${owner.name})`;
	if (!member) await admin.unsafe(`grant ${ident(app.name)} to ${ident(owner.name)}`);
}

/**
 * A database made before the two roles (its objects owned by the superuser): the superuser, connected
 * to it, gives the database, public and drizzle to the owner and pgboss to the app role.
 */
export async function adoptDatabase(admin, { owner, app }) {
	const [{ name, dbOwner }] =
		await admin`select current_database() as name, pg_get_userbyid(datdba) as "dbOwner" from pg_database where datname = current_database()`;
	let changed = 0;
	if (dbOwner !== owner) {
		await admin.unsafe(`alter database ${ident(name)} owner to ${ident(owner)}`);
		changed++;
	}
	for (const schema of ['public', 'drizzle']) {
		const [present] = await admin`select pg_get_userbyid(nspowner) as owner from pg_namespace where nspname = ${schema}`;
		// public belongs to pg_database_owner on PostgreSQL 15 and later, that is to the database's owner
		if (present) changed += await handOverSchema(admin, schema, owner, { includeSchema: present.owner !== 'pg_database_owner' });
	}
	changed += await handOverSchema(admin, 'pgboss', app);
	return changed;
}
