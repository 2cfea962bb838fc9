// The app connects as a role that owns nothing it must not change (scripts/lib/db-roles.mjs): it
// appends to the audit log but cannot alter, delete or truncate it, cannot drop its triggers and cannot
// change or make tables; the owner role migrates, and the grants step gives every table in public
// exactly the declared rights, also a table a later migration adds. `npm test` runs every integration
// file as the app role, so the rest of the suite shows the app's own work still goes through.
import postgres from 'postgres';
import PgBoss from 'pg-boss';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { APPEND_ONLY_TABLES, appTablePrivileges, declaredTablePrivileges, grantAppRole } from '../../../../scripts/lib/db-roles.mjs';
import { grantApp } from '../../../../scripts/migrate';
import { record } from '../../../../src/lib/server/audit';
import { getDb } from '../../../../src/lib/server/db';

const connect = (url: string) => postgres(url, { max: 1, onnotice: () => {} });
let app: postgres.Sql;
let owner: postgres.Sql;
let appRole: string;
let ownerRole: string;

/** The error PostgreSQL answers a statement with (null when it runs). */
async function refusal(sql: postgres.Sql, statement: string): Promise<{ code: string; message: string } | null> {
	try {
		await sql.unsafe(statement);
		return null;
	} catch (error) {
		const e = error as { code: string; message: string };
		return { code: e.code, message: e.message };
	}
}

beforeAll(async () => {
	app = connect(process.env.DATABASE_URL!);
	owner = connect(process.env.DATABASE_OWNER_URL!);
	[{ role: appRole }] = await app`select current_user as role`;
	[{ role: ownerRole }] = await owner`select current_user as role`;
});

afterAll(async () => {
	await app?.end({ timeout: 5 });
	await owner?.end({ timeout: 5 });
});

describe('the app role', () => {
	it('is not the owner of the tables, nor a superuser, nor allowed to make databases or roles', async () => {
		expect(appRole).not.toBe(ownerRole);
		const [role] = await app`select rolsuper, rolcreatedb, rolcreaterole, rolbypassrls from pg_roles where rolname = current_user`;
		expect(role).toEqual({ rolsuper: false, rolcreatedb: false, rolcreaterole: false, rolbypassrls: false });
		const owned =
			await app`select c.relname from pg_class c join pg_namespace n on n.oid = c.relnamespace where n.nspname in ('public', 'drizzle') and c.relowner = (select oid from pg_roles where rolname = current_user)`;
		expect(owned).toEqual([]);
	});

	it('appends to the audit log, through the service and by hand', async () => {
		await record({ actorLabel: 'roles test', action: 'roles.checked', objectType: 'test', objectId: 'R-1' }, getDb());
		const [row] =
			await app`insert into audit_log (actor_label, action, object_type, object_id) values ('roles test', 'roles.inserted', 'test', 'R-2') returning id`;
		expect(Number(row.id)).toBeGreaterThan(0);
		const rows = await app`select action from audit_log where actor_label = 'roles test' order by id`;
		expect(rows.map((r) => r.action)).toEqual(['roles.checked', 'roles.inserted']);
	});

	it('may not UPDATE, DELETE or TRUNCATE the audit log or the access log: permission denied before any trigger runs', async () => {
		for (const statement of [
			`update audit_log set action = 'tampered'`,
			'delete from audit_log',
			'truncate audit_log',
			`update access_log set actor_label = 'someone else'`,
			`delete from access_log where at < now() - interval '401 days'`,
			'truncate access_log'
		]) {
			const error = await refusal(app, statement);
			expect(error, statement).toMatchObject({ code: '42501' });
			expect(error!.message, statement).toMatch(/permission denied for table (audit_log|access_log)/);
		}
	});

	it('may not TRUNCATE any table in public', async () => {
		const tables = await app`select tablename from pg_tables where schemaname = 'public' order by 1`;
		expect(tables.length).toBeGreaterThan(20);
		for (const { tablename } of tables) {
			const error = await refusal(app, `truncate "${tablename}" cascade`);
			expect(error?.code, tablename).toBe('42501');
		}
	});

	it('may not drop or disable triggers, alter, drop or create tables, or replace functions', async () => {
		const statements = [
			'drop trigger audit_log_no_update_delete on audit_log',
			'alter table audit_log disable trigger audit_log_no_truncate',
			'alter table audit_log add column note text',
			'alter table users drop column email',
			'drop table access_log',
			'drop table flags cascade',
			'create table public.scratch (id int)',
			'create table scratch_unqualified (id int)',
			`create or replace function audit_log_reject_change() returns trigger as $$ begin return old; end; $$ language plpgsql`,
			'drop function audit_log_reject_change() cascade',
			'create schema app_own',
			'drop schema public cascade'
		];
		for (const statement of statements) {
			const error = await refusal(app, statement);
			expect(error, statement).not.toBeNull();
			// 42501 insufficient privilege; "must be owner" is the same code
			expect(error!.code, `${statement}: ${error!.message}`).toBe('42501');
		}
		const [{ triggers }] =
			await app`select count(*)::int as triggers from pg_trigger where tgrelid = 'audit_log'::regclass and not tgisinternal and tgenabled = 'O'`;
		expect(triggers).toBe(2);
	});

	it("owns the queue's schema, so pg-boss can make a queue's table at run time", async () => {
		const [schema] = await app`select pg_get_userbyid(nspowner) as owner from pg_namespace where nspname = 'pgboss'`;
		expect(schema.owner).toBe(appRole);
		const boss = new PgBoss({ connectionString: process.env.DATABASE_URL!, schema: 'pgboss', max: 2, supervise: false, schedule: false });
		await boss.start();
		try {
			await boss.createQueue('roles-test-queue');
			const id = await boss.send('roles-test-queue', { n: 1 });
			expect(id).toBeTruthy();
			const partitions = await app`select count(*)::int as n from pg_inherits where inhparent = 'pgboss.job'::regclass`;
			expect(partitions[0].n).toBeGreaterThan(0);
		} finally {
			await boss.stop({ graceful: false, wait: true });
		}
	});

	it('listens and is notified (board cache and queue wake-ups)', async () => {
		const listener = connect(process.env.DATABASE_URL!);
		try {
			const heard = new Promise<string>((resolve) => void listener.listen('ebbline_roles_test', resolve));
			await new Promise((r) => setTimeout(r, 100));
			await app`select pg_notify('ebbline_roles_test', 'hello')`;
			expect(await heard).toBe('hello');
		} finally {
			await listener.end({ timeout: 5 });
		}
	});
});

describe('the grants step', () => {
	it('gives every table in public exactly the declared rights, and the sequences USAGE and SELECT', async () => {
		const held = await appTablePrivileges(owner, appRole);
		const tables = Object.keys(held);
		expect(tables).toEqual(expect.arrayContaining(['audit_log', 'access_log', 'users', 'flags', 'orders']));
		for (const table of tables) expect(held[table], table).toEqual([...declaredTablePrivileges(table)].sort());
		for (const table of APPEND_ONLY_TABLES) expect(held[table]).toEqual(['INSERT', 'SELECT']);
		const sequences =
			await app`select c.relname, has_sequence_privilege(c.oid, 'USAGE') as usage, has_sequence_privilege(c.oid, 'SELECT') as select, has_sequence_privilege(c.oid, 'UPDATE') as update
			from pg_class c join pg_namespace n on n.oid = c.relnamespace where n.nspname = 'public' and c.relkind = 'S'`;
		expect(sequences.length).toBeGreaterThan(0);
		for (const s of sequences) expect(s, s.relname).toMatchObject({ usage: true, select: true, update: false });
		const [history] =
			await app`select has_table_privilege('drizzle.__drizzle_migrations', 'SELECT') as read, has_table_privilege('drizzle.__drizzle_migrations', 'INSERT') as write`;
		expect(history).toEqual({ read: true, write: false });
	});

	it("gives a new migration's table the ordinary rights at once, narrows an append-only one, and is idempotent", async () => {
		// as a migration would: the owner makes two tables (one named as an append-only log would be declared)
		await owner.unsafe('create table roles_test_new (id bigserial primary key, note text)');
		await owner.unsafe('alter table audit_log rename to audit_log_kept');
		await owner.unsafe('create table audit_log (id bigserial primary key)');
		try {
			// default privileges: usable before the grants step runs
			await app`insert into roles_test_new (note) values ('made by the app')`;
			expect((await appTablePrivileges(owner, appRole)).audit_log).toEqual(['DELETE', 'INSERT', 'SELECT', 'UPDATE']);
			const first = await grantApp();
			expect(first.changed).toContain('audit_log: SELECT, INSERT');
			const held = await appTablePrivileges(owner, appRole);
			expect(held.roles_test_new).toEqual(['DELETE', 'INSERT', 'SELECT', 'UPDATE']);
			expect(held.audit_log).toEqual(['INSERT', 'SELECT']);
			expect((await refusal(app, 'delete from audit_log'))?.code).toBe('42501');
			const again = await grantAppRole(owner, appRole);
			expect(again.changed).toEqual([]);
		} finally {
			await owner.unsafe('drop table audit_log');
			await owner.unsafe('alter table audit_log_kept rename to audit_log');
			await owner.unsafe('drop table roles_test_new');
			await grantApp();
		}
		expect((await appTablePrivileges(owner, appRole)).audit_log).toEqual(['INSERT', 'SELECT']);
	});

	it('takes back a right granted by hand that the declaration does not give', async () => {
		await owner.unsafe(`grant update, truncate on audit_log to "${appRole}"`);
		expect((await appTablePrivileges(owner, appRole)).audit_log).toEqual(['INSERT', 'SELECT', 'TRUNCATE', 'UPDATE']);
		await grantApp();
		expect((await appTablePrivileges(owner, appRole)).audit_log).toEqual(['INSERT', 'SELECT']);
	});
});
