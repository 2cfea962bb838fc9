// The production start refuses a database that holds the demo's invented staff (published password) or
// patients, and serves a clean one; the first administrator is created by a one-off command that reads
// the password from standard input and prints nothing secret. The scripts run for real against this
// file's own database.
import { spawnSync } from 'node:child_process';
import path from 'node:path';
import { eq, sql } from 'drizzle-orm';
import { describe, expect, it } from 'vitest';
import { getDb } from '../../../src/lib/server/db';
import { auditLog, users } from '../../../src/lib/server/db/schema';
import { productionRefusal } from '../../../src/lib/server/ops/preflight';
import { verifyPassword } from '../../../src/lib/server/password';

const root = path.resolve(new URL('../../../', import.meta.url).pathname);
const tsx = path.join(root, 'node_modules/.bin/tsx');
const script = (args: string[], input?: string, env: Record<string, string> = {}) =>
	spawnSync(tsx, args, { cwd: root, input, encoding: 'utf8', env: { ...process.env, ...env }, timeout: 60_000 });

const PASSWORD = 'a long and private passphrase';

describe('production pre-flight', () => {
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
		const [audit] = await getDb().select().from(auditLog).where(eq(auditLog.objectId, admin.id));
		expect(audit).toMatchObject({ action: 'user.created', actorLabel: 'admin:create command' });
		expect(JSON.stringify(audit)).not.toContain(PASSWORD);

		const again = script(['scripts/create-admin.ts', '--email', 'lead@hospital.example', '--name', 'Someone Else'], `${PASSWORD}\n`);
		expect(again.status).toBe(3);
		expect(again.stderr).toContain('already exists');
		const short = script(['scripts/create-admin.ts', '--email', 'second@hospital.example', '--name', 'Second Lead'], 'short\n');
		expect(short.status).toBe(2);
		expect(short.stderr).toContain('at least 12 characters');
		// a real administrator alone is not demo content
		expect(await productionRefusal(getDb())).toBeNull();
	});

	it('npm start with a DATABASE_URL that holds no demo stops before migrating or seeding, unless EBBLINE_DEMO=1', () => {
		const refused = script(['scripts/preflight.ts', '--demo']);
		expect(refused.status).toBe(3);
		expect(refused.stderr).toContain('npm run serve');
		expect(script(['scripts/preflight.ts', '--demo'], undefined, { EBBLINE_DEMO: '1' }).status).toBe(0);
	});

	it('refuses while a demo account exists, naming it, and the serve command stops before serving', async () => {
		await getDb().insert(users).values({ email: 'admin@larkspur.test', displayName: 'Demo Admin', role: 'admin', passwordHash: 'x' });
		const refusal = await productionRefusal(getDb());
		expect(refusal).toContain('admin@larkspur.test');
		const run = script(['scripts/preflight.ts', '--production']);
		expect(run.status).toBe(3);
		expect(run.stderr).toContain('admin@larkspur.test');
		const serve = spawnSync(process.execPath, ['scripts/serve.mjs'], {
			cwd: root,
			encoding: 'utf8',
			timeout: 120_000,
			env: { ...process.env, ORIGIN: 'https://ebbline.hospital.example', SMTP_URL: 'smtp://127.0.0.1:1', PORT: '1' }
		});
		expect(serve.status).toBe(3);
		expect(serve.stderr).toContain('demo');
		await getDb().delete(users).where(eq(users.email, 'admin@larkspur.test'));
	});

	it('refuses demo patients (feed messages from the demo seed or simulator)', async () => {
		await getDb().execute(sql`insert into feed_messages (source, content_hash, raw, entry_count) values ('simulator', 'preflight-test', '{}', 0)`);
		expect(await productionRefusal(getDb())).toContain('Larkspur Bay patients');
	});

	it('serve names each missing variable and starts nothing', () => {
		const env = { ...process.env };
		delete env.ORIGIN;
		delete env.SMTP_URL;
		const run = spawnSync(process.execPath, ['scripts/serve.mjs'], { cwd: root, encoding: 'utf8', env, timeout: 30_000 });
		expect(run.status).toBe(2);
		expect(run.stderr).toContain('ORIGIN is not set');
		expect(run.stderr).toContain('SMTP_URL is not set');
	});
});
