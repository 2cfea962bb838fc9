// The production start refuses a database that holds the demo's invented staff (published password) or
// patients, and accepts a clean one with a real administrator; the first administrator is created by a
// one-off command that reads the password from standard input and prints nothing secret; npm start
// does not put the demo into a DATABASE_URL database that is not already a demo one. The scripts run
// for real against this file's own database (tests run in order and share it).
import { spawnSync } from 'node:child_process';
import path from 'node:path';
import { and, eq, sql } from 'drizzle-orm';
import postgres from 'postgres';
import { describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { auditLog, users } from '../../../../src/lib/server/db/schema';
import { demoUsers } from '../../../../src/lib/server/demo';
import { demoContent, productionRefusal } from '../../../../src/lib/server/ops';
import { hashPassword, verifyPassword } from '../../../../src/lib/server/auth';

const root = path.resolve(new URL('../../../../', import.meta.url).pathname);
const tsx = path.join(root, 'node_modules/.bin/tsx');
const script = (args: string[], input?: string, env: Record<string, string> = {}) =>
	spawnSync(tsx, args, { cwd: root, input, encoding: 'utf8', env: { ...process.env, ...env }, timeout: 60_000 });
const serve = (env: NodeJS.ProcessEnv) => spawnSync(process.execPath, ['scripts/serve.mjs'], { cwd: root, encoding: 'utf8', env, timeout: 60_000 });
const productionEnv = () => ({ ...process.env, ORIGIN: 'https://ebbline.hospital.example', SMTP_URL: 'smtp://127.0.0.1:1', PORT: '1' });

const PASSWORD = 'a long and private passphrase';
const auditFor = (id: string) => getDb().select().from(auditLog).where(eq(auditLog.objectId, id));

describe('production start', () => {
	it('accepts a clean migrated database', async () => {
		expect(await productionRefusal(getDb())).toBeNull();
		const run = script(['scripts/preflight.ts', '--production']);
		expect(run.status, run.stderr).toBe(0);
	});

	it('creates the first administrator from a piped password, prints nothing secret, audits it, and refuses a duplicate', async () => {
		const run = script(['scripts/create-admin.ts', '--email', 'Lead@Hospital.example', '--name', 'Stewardship Lead'], `${PASSWORD}\n`);
		expect(run.status, run.stderr).toBe(0);
		expect(run.stdout + run.stderr).not.toContain(PASSWORD);
		expect(run.stdout).toContain('lead@hospital.example');
		const [admin] = await getDb().select().from(users).where(eq(users.email, 'lead@hospital.example'));
		expect(admin).toMatchObject({ role: 'admin', active: true, displayName: 'Stewardship Lead' });
		expect(await verifyPassword(admin.passwordHash, PASSWORD)).toBe(true);
		const audit = await auditFor(admin.id);
		expect(audit).toHaveLength(1);
		expect(audit[0]).toMatchObject({ action: 'user.created', actorLabel: 'admin:create command', actorId: null });
		expect(JSON.stringify(audit)).not.toContain(PASSWORD);

		const again = script(['scripts/create-admin.ts', '--email=lead@hospital.example', '--name=Someone Else'], `${PASSWORD}\n`);
		expect(again.status).toBe(3);
		expect(again.stderr).toContain('lead@hospital.example already exists');
		const [still] = await getDb().select().from(users).where(eq(users.email, 'lead@hospital.example'));
		expect(still.displayName).toBe('Stewardship Lead');
		expect(await verifyPassword(still.passwordHash, PASSWORD)).toBe(true);

		const short = script(['scripts/create-admin.ts', '--email', 'second@hospital.example', '--name', 'Second Lead'], 'short\n');
		expect(short.status).toBe(2);
		expect(short.stderr).toContain('at least 12 characters');
		const demoDomain = script(['scripts/create-admin.ts', '--email', 'lead@larkspur.test', '--name', 'Demo Lead'], `${PASSWORD}\n`);
		expect(demoDomain.status).toBe(2);
		expect(demoDomain.stderr).toContain('.test');
		const usage = script(['scripts/create-admin.ts', '--email', 'third@hospital.example'], `${PASSWORD}\n`);
		expect(usage.status).toBe(2);
		expect(usage.stderr).toContain('usage: npm run admin:create');
		const created = await getDb().select({ email: users.email }).from(users);
		expect(created.map((u) => u.email)).toEqual(['lead@hospital.example']);

		// one real administrator is not demo content: the production start accepts the database
		expect(await productionRefusal(getDb())).toBeNull();
		expect(script(['scripts/preflight.ts', '--production']).status).toBe(0);
		// five commands, two of which migrate (and grant) and hash a password: slow on a busy machine
	}, 180_000);

	it('npm start with a DATABASE_URL that holds no demo is refused unless EBBLINE_DEMO=1, and an empty database is left unmigrated', async () => {
		const refused = script(['scripts/preflight.ts', '--demo']);
		expect(refused.status).toBe(3);
		expect(refused.stderr).toContain('npm run serve');
		expect(refused.stderr).toContain('EBBLINE_DEMO=1');
		expect(script(['scripts/preflight.ts', '--demo'], undefined, { EBBLINE_DEMO: '1' }).status).toBe(0);

		// start.mjs runs this check before migrating: on an empty database it must work and refuse
		const adminUrl = process.env.EBBLINE_TEST_ADMIN_URL!;
		const name = `${process.env.EBBLINE_TEST_TEMPLATE_DB}_empty_${Math.random().toString(36).slice(2, 8)}`;
		const admin = postgres(adminUrl, { max: 1, onnotice: () => {} });
		await admin.unsafe(`create database "${name}"`);
		try {
			const url = new URL(adminUrl);
			url.pathname = `/${name}`;
			const empty = script(['scripts/preflight.ts', '--demo'], undefined, { DATABASE_URL: url.toString() });
			expect(empty.status, empty.stderr).toBe(3);
			const other = postgres(url.toString(), { max: 1, onnotice: () => {} });
			const [{ tables }] = await other`select count(*)::int as tables from pg_tables where schemaname = 'public'`;
			await other.end();
			expect(tables).toBe(0);
		} finally {
			await admin.unsafe(`drop database if exists "${name}" with (force)`);
			await admin.end();
		}
	});

	it('refuses while a demo account exists, naming it; npm run serve exits before serving; npm start takes it for a demo database', async () => {
		await getDb()
			.insert(users)
			.values({ email: 'admin@larkspur.test', displayName: 'Demo Admin', role: 'admin', passwordHash: await hashPassword(demoUsers().password) });
		await getDb()
			.insert(users)
			.values({ email: 'tester@example.test', displayName: 'A Tester', role: 'pharmacist', passwordHash: await hashPassword(PASSWORD) });
		const refusal = await productionRefusal(getDb());
		expect(refusal).toContain('Demo accounts (2): admin@larkspur.test, tester@example.test.');
		expect(refusal).toContain('npm run demo:retire-accounts');
		const run = script(['scripts/preflight.ts', '--production']);
		expect(run.status).toBe(3);
		expect(run.stderr).toContain('admin@larkspur.test');

		const served = serve(productionEnv());
		expect(served.status, served.stdout + served.stderr).toBe(3);
		expect(served.stderr).toContain('admin@larkspur.test');
		expect(served.stderr).toContain('not started: the database holds demo content');
		expect(served.stdout).not.toContain('serving');

		expect(script(['scripts/preflight.ts', '--demo']).status).toBe(0);
	});

	it('a deactivated demo account still refuses while it has the published password; retiring the accounts (audited) lets the start go ahead', async () => {
		const [demoAdmin] = await getDb().update(users).set({ active: false }).where(eq(users.email, 'admin@larkspur.test')).returning();
		const [tester] = await getDb().select().from(users).where(eq(users.email, 'tester@example.test'));
		const c = await demoContent(getDb());
		expect(c.accounts).toEqual([
			{ email: 'admin@larkspur.test', active: false, publishedPassword: true },
			{ email: 'tester@example.test', active: true, publishedPassword: true }
		]);
		expect(await productionRefusal(getDb())).toContain('admin@larkspur.test (deactivated, still with the published demo password)');

		const retire = script(['scripts/preflight.ts', '--retire-demo-accounts']);
		expect(retire.status, retire.stderr).toBe(0);
		expect(retire.stdout).toContain('admin@larkspur.test, tester@example.test');
		const after = await getDb()
			.select()
			.from(users)
			.where(sql`${users.email} in ('admin@larkspur.test', 'tester@example.test')`);
		expect(after.every((u) => !u.active)).toBe(true);
		for (const u of after) {
			expect(await verifyPassword(u.passwordHash, demoUsers().password)).toBe(false);
			expect(await verifyPassword(u.passwordHash, PASSWORD)).toBe(false);
		}
		expect((await auditFor(demoAdmin.id)).map((a) => a.action)).toEqual(['user.password_reset']);
		expect((await auditFor(tester.id)).map((a) => a.action).sort()).toEqual(['user.deactivated', 'user.password_reset']);
		const [row] = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.objectId, tester.id), eq(auditLog.action, 'user.deactivated')));
		expect(row.actorLabel).toBe('demo:retire-accounts command');

		expect(await productionRefusal(getDb())).toBeNull();
		expect(script(['scripts/preflight.ts', '--production']).status).toBe(0);
		expect(script(['scripts/preflight.ts', '--retire-demo-accounts']).stdout).toContain('nothing changed');
	});

	it('refuses demo patients: feed messages from the demo seed or simulator, or patients with the generator’s identifiers', async () => {
		await getDb().execute(sql`insert into feed_messages (source, content_hash, raw, entry_count) values ('simulator', 'preflight-test', '{}', 0)`);
		expect(await productionRefusal(getDb())).toContain('1 feed message(s) from the demo seed or simulator');
		await getDb().execute(sql`delete from feed_messages where content_hash = 'preflight-test'`);
		expect(await productionRefusal(getDb())).toBeNull();

		// a hospital whose MRNs start with LBH is not the demo; the generator's Patient.id and MRN together are
		await getDb().execute(
			sql`insert into patients (mrn, source_id, given_name, family_name, birth_date, sex) values ('LBH2001234', 'pat-77', 'Real', 'Person', '1950-01-01', 'female')`
		);
		expect(await productionRefusal(getDb())).toBeNull();
		await getDb().execute(
			sql`insert into patients (mrn, source_id, given_name, family_name, birth_date, sex) values ('LBH2008919', 'lbh-p-0001', 'Invented', 'Person', '1950-01-01', 'male')`
		);
		const refusal = await productionRefusal(getDb());
		expect(refusal).toContain('Demo patients: 1 patient(s)');
		expect(refusal).toContain('new, empty database');
		const served = serve(productionEnv());
		expect(served.status).toBe(3);
		expect(served.stderr).toContain('Demo patients');
		expect(served.stderr).not.toContain('WARNING');
		// one role for everything: a loud warning first (the pre-flight still refuses, before migrating)
		const single: NodeJS.ProcessEnv = productionEnv();
		delete single.DATABASE_OWNER_URL;
		const warned = serve(single);
		expect(warned.status).toBe(3);
		expect(warned.stderr).toContain('WARNING: DATABASE_OWNER_URL is not set, so the app connects as the role that owns the tables.');
		expect(warned.stderr).toContain('drop the audit log');
	});

	it('serve refuses an owner login to another database than the app’s', () => {
		const elsewhere = new URL(process.env.DATABASE_OWNER_URL!);
		elsewhere.pathname = '/another_database';
		const mismatched = serve({ ...productionEnv(), DATABASE_OWNER_URL: elsewhere.toString() });
		expect(mismatched.status).toBe(2);
		expect(mismatched.stderr).toContain('DATABASE_OWNER_URL names');
		expect(mismatched.stderr).toContain('/another_database');
	});

	it('serve names each missing or malformed variable and starts nothing', () => {
		const env = { ...process.env };
		delete env.ORIGIN;
		delete env.SMTP_URL;
		const run = serve(env);
		expect(run.status).toBe(2);
		expect(run.stderr).toContain('ORIGIN is not set');
		expect(run.stderr).toContain('SMTP_URL is not set');
		expect(run.stderr).not.toContain('DATABASE_URL');

		const malformed = serve({ ...productionEnv(), ORIGIN: 'https://ebbline.hospital.example/app', SMTP_URL: 'relay.hospital.example', EBBLINE_WORKERS: 'yes' });
		expect(malformed.status).toBe(2);
		expect(malformed.stderr).toContain('ORIGIN=https://ebbline.hospital.example/app is not an origin');
		expect(malformed.stderr).toContain('SMTP_URL is not an smtp:// or smtps:// URL');
		expect(malformed.stderr).toContain('EBBLINE_WORKERS=yes');
	});

	it('serve requires the second-factor key and refuses the flag that lets administrators in without a second factor', () => {
		const env: NodeJS.ProcessEnv = productionEnv();
		delete env.EBBLINE_TOTP_KEY;
		const missing = serve(env);
		expect(missing.status).toBe(2);
		expect(missing.stderr).toContain('EBBLINE_TOTP_KEY is not set');
		expect(serve({ ...env, EBBLINE_TOTP_KEY: 'c2hvcnQ=' }).stderr).toContain('EBBLINE_TOTP_KEY is not 32 bytes');
		const optional = serve({ ...productionEnv(), EBBLINE_TOTP_KEY: Buffer.alloc(32, 5).toString('base64'), EBBLINE_ADMIN_TOTP: 'optional' });
		expect(optional.status).toBe(2);
		expect(optional.stderr).toContain('EBBLINE_ADMIN_TOTP=optional');
		expect(optional.stderr).not.toContain('EBBLINE_TOTP_KEY');
	});

	it('serve refuses the development mailbox flag (it would show /dev/mail) and starts nothing', () => {
		const run = serve({ ...productionEnv(), EBBLINE_DEV_MAILBOX: 'on' });
		expect(run.status).toBe(2);
		expect(run.stderr).toContain('EBBLINE_DEV_MAILBOX=on');
		expect(run.stderr).not.toContain('ORIGIN');
	});
});
