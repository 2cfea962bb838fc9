// Backup and restore for real: the seeded demo is backed up with `npm run backup`, restored with
// `npm run restore` into a fresh empty database, and compared table by table (row counts and a hash of
// every row) and by the audit chain. The restore refuses a database that is not empty, a backup whose
// migration level this code does not know, and a damaged file; it brings an older backup up to date.
// The nightly job takes a backup and keeps BACKUP_KEEP of them. Each scratch database is dropped.
import { spawnSync } from 'node:child_process';
import { copyFileSync, existsSync, mkdtempSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import postgres from 'postgres';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import journal from '../../../../drizzle/meta/_journal.json';
import { backupNightly } from '../../../../jobs/backup-nightly';
import { seedDemo } from '../../../../src/lib/server/demo';
import { backup } from '../../../../src/lib/server/ops';
import { lastFailedJob, QUEUES } from '../../../../src/lib/server/queue';
import { applyMigrations, createScratchDatabase, dropScratchDatabase, migrationsFolderUpTo, type ScratchDatabase } from '../db/migrations/helpers';

const root = path.resolve(new URL('../../../../', import.meta.url).pathname);
const tsx = path.join(root, 'node_modules/.bin/tsx');
const latest = journal.entries[journal.entries.length - 1];
const previous = journal.entries[journal.entries.length - 2];

const backupDir = mkdtempSync(path.join(os.tmpdir(), 'ebbline-backups-'));
const scratch: ScratchDatabase[] = [];
const sourceUrl = () => process.env.DATABASE_URL!;

function command(script: 'backup' | 'restore', args: string[], databaseUrl: string, dir = backupDir) {
	const env: NodeJS.ProcessEnv = { ...process.env, DATABASE_URL: databaseUrl, BACKUP_DIR: dir };
	// this file's own database has an owner login; a scratch database is the superuser's alone
	if (databaseUrl !== sourceUrl()) delete env.DATABASE_OWNER_URL;
	const run = spawnSync(tsx, [`scripts/${script}.ts`, ...args], {
		cwd: root,
		encoding: 'utf8',
		env,
		timeout: 120_000
	});
	return { status: run.status, out: `${run.stdout}\n${run.stderr}`, stdout: run.stdout, stderr: run.stderr };
}

async function scratchDatabase(label: string, template?: string) {
	const db = await createScratchDatabase(`backup_${label}`, template);
	scratch.push(db);
	return db;
}

async function withSql<T>(url: string, fn: (sql: postgres.Sql) => Promise<T>): Promise<T> {
	const sql = postgres(url, { max: 1, onnotice: () => {} });
	try {
		return await fn(sql);
	} finally {
		await sql.end({ timeout: 5 });
	}
}

/** Every public table with its row count and a hash of all its rows, computed here independently of the service. */
function tableFingerprints(url: string) {
	return withSql(url, async (sql) => {
		const tables = await sql<{ name: string }[]>`select tablename as name from pg_tables where schemaname = 'public' order by 1`;
		const result: Record<string, { rows: number; hash: string }> = {};
		for (const { name } of tables) {
			const [row] = await sql.unsafe(
				`select count(*)::int as rows, md5(coalesce(string_agg(t::text, E'\\n' order by t::text), '')) as hash from public."${name}" t`
			);
			result[name] = { rows: row.rows, hash: row.hash };
		}
		return result;
	});
}

/** The audit chain as this test reads it: ids and actions in id order. */
function auditChecksum(url: string) {
	return withSql(url, async (sql) => {
		const [row] = await sql`select count(*)::int as n, md5(string_agg(id::text || ':' || action, ',' order by id)) as checksum from audit_log`;
		return row as { n: number; checksum: string };
	});
}

const publicTableCount = (url: string) =>
	withSql(url, async (sql) => (await sql`select count(*)::int as n from pg_tables where schemaname = 'public'`)[0].n as number);
const migrationLevel = (url: string) =>
	withSql(url, async (sql) => Number((await sql`select max(created_at)::bigint as at from drizzle.__drizzle_migrations`)[0].at));

const dumps = (dir = backupDir) =>
	readdirSync(dir)
		.filter((f) => f.endsWith('.dump'))
		.sort();

let demoBackup = '';

beforeAll(async () => {
	const summary = await seedDemo({ days: 0 });
	expect(summary['demo patients']).toBeGreaterThan(0);
}, 180_000);

afterAll(async () => {
	for (const db of scratch) await dropScratchDatabase(db);
	rmSync(backupDir, { recursive: true, force: true });
});

describe('npm run backup and npm run restore', { timeout: 120_000 }, () => {
	it('backs up the seeded demo into BACKUP_DIR, named by time, version and migration, with a sidecar that describes it', async () => {
		const run = command('backup', [], sourceUrl());
		expect(run.status, run.out).toBe(0);
		const files = dumps();
		expect(files).toHaveLength(1);
		demoBackup = path.join(backupDir, files[0]);
		expect(files[0]).toMatch(new RegExp(`^ebbline-\\d{8}T\\d{6}Z-v${backup.EBBLINE_VERSION.replace(/\./g, '\\.')}-${latest.tag}\\.dump$`));
		expect(run.stdout).toContain(files[0]);

		const sidecar = JSON.parse(readFileSync(`${demoBackup}.json`, 'utf8')) as backup.BackupSidecar;
		expect(sidecar.migration).toEqual({ tag: latest.tag, createdAt: latest.when, known: true });
		expect(sidecar.sha256).toBe(await backup.sha256File(demoBackup));
		expect(sidecar.sizeBytes).toBe(readFileSync(demoBackup).length);
		// custom format: pg_restore's archive signature
		expect(readFileSync(demoBackup).subarray(0, 5).toString()).toBe('PGDMP');
		const live = await tableFingerprints(sourceUrl());
		for (const [table, { rows }] of Object.entries(live)) expect(sidecar.rowCounts[`public.${table}`], table).toBe(rows);
		expect(sidecar.rowCounts['public.assessments']).toBeGreaterThan(0);
		const audit = await auditChecksum(sourceUrl());
		expect(sidecar.auditLog.count).toBe(audit.n);
		expect(audit.n).toBeGreaterThan(0);
	});

	it('restores into a fresh empty database with every public table and the audit chain identical', async () => {
		const target = await scratchDatabase('fresh');
		const run = command('restore', [demoBackup], target.url);
		expect(run.status, run.out).toBe(0);
		expect(run.stdout).toContain('check passed');
		expect(run.stdout).toContain('nothing to migrate');

		const [before, after] = await Promise.all([tableFingerprints(sourceUrl()), tableFingerprints(target.url)]);
		expect(Object.keys(after).length).toBeGreaterThan(20);
		expect(after).toEqual(before);
		expect(await auditChecksum(target.url)).toEqual(await auditChecksum(sourceUrl()));
		expect(await migrationLevel(target.url)).toBe(latest.when);
	});

	it('restores as the owner role (DATABASE_OWNER_URL), then gives the app role its rights and the queue again', async () => {
		const target = await scratchDatabase('roles');
		const login = (url: string) => {
			const u = new URL(url);
			u.pathname = `/${target.name}`;
			return u.toString();
		};
		const appUrl = login(sourceUrl());
		const ownerUrl = login(process.env.DATABASE_OWNER_URL!);
		const owner = decodeURIComponent(new URL(ownerUrl).username);
		await withSql(target.url, (sql) => sql.unsafe(`alter database "${target.name}" owner to "${owner}"`));
		const run = spawnSync(tsx, ['scripts/restore.ts', demoBackup], {
			cwd: root,
			encoding: 'utf8',
			env: { ...process.env, DATABASE_URL: appUrl, DATABASE_OWNER_URL: ownerUrl, BACKUP_DIR: backupDir },
			timeout: 120_000
		});
		expect(run.status, `${run.stdout}\n${run.stderr}`).toBe(0);
		expect(run.stdout).toContain('check passed');
		expect(run.stdout).toContain('the app role (DATABASE_URL) has its rights on the restored database');
		expect(await tableFingerprints(appUrl)).toEqual(await tableFingerprints(sourceUrl()));
		await withSql(appUrl, async (sql) => {
			const [tables] = await sql`select count(*)::int as n from pg_tables where schemaname = 'public' and tableowner = current_user`;
			expect(tables.n).toBe(0);
			const [queue] = await sql`select pg_get_userbyid(nspowner) = current_user as owns from pg_namespace where nspname = 'pgboss'`;
			expect(queue.owns).toBe(true);
			await expect(sql`delete from audit_log`).rejects.toMatchObject({ code: '42501' });
			const [inserted] = await sql`insert into audit_log (actor_label, action, object_type) values ('restore test', 'restore.checked', 'test') returning id`;
			expect(Number(inserted.id)).toBeGreaterThan(0);
		});
	});

	it('refuses a database that is not empty, saying why, and changes nothing', async () => {
		const before = await tableFingerprints(sourceUrl());
		const run = command('restore', [demoBackup], sourceUrl());
		expect(run.status, run.out).toBe(3);
		expect(run.stderr).toContain('is not empty');
		expect(run.stderr).toContain('public.');
		expect(run.stderr).toContain('Nothing was restored');
		expect(await tableFingerprints(sourceUrl())).toEqual(before);

		// one table of someone else's is enough to refuse
		const other = await scratchDatabase('occupied');
		await withSql(other.url, (sql) => sql`create table notes (id int)`);
		const occupied = command('restore', [demoBackup], other.url);
		expect(occupied.status, occupied.out).toBe(3);
		expect(occupied.stderr).toContain('public.notes');
		expect(await publicTableCount(other.url)).toBe(1);
	});

	it('refuses a backup whose migration level this code does not know (written by a newer Ebbline)', async () => {
		const newer = await scratchDatabase('newer', process.env.EBBLINE_TEST_TEMPLATE_DB);
		await withSql(
			newer.url,
			(sql) => sql`insert into drizzle.__drizzle_migrations (hash, created_at) values ('from-a-newer-release', ${latest.when + 86_400_000})`
		);
		const dir = mkdtempSync(path.join(os.tmpdir(), 'ebbline-backups-newer-'));
		try {
			const taken = command('backup', [], newer.url, dir);
			expect(taken.status, taken.out).toBe(0);
			const [file] = dumps(dir);
			expect(file).toContain(`-unknown-${latest.when + 86_400_000}.dump`);

			const target = await scratchDatabase('for-newer');
			const run = command('restore', [path.join(dir, file)], target.url);
			expect(run.status, run.out).toBe(3);
			expect(run.stderr).toContain('newer than this code');
			expect(run.stderr).toContain(latest.tag);
			expect(await publicTableCount(target.url)).toBe(0);
		} finally {
			rmSync(dir, { recursive: true, force: true });
		}
	});

	it('refuses a damaged backup, and one without its sidecar unless --unverified is given', async () => {
		const dir = mkdtempSync(path.join(os.tmpdir(), 'ebbline-backups-damaged-'));
		try {
			const damaged = path.join(dir, path.basename(demoBackup));
			const bytes = readFileSync(demoBackup);
			bytes[bytes.length - 100] ^= 0xff;
			writeFileSync(damaged, bytes);
			copyFileSync(`${demoBackup}.json`, `${damaged}.json`);
			const target = await scratchDatabase('damaged');
			const run = command('restore', [damaged], target.url);
			expect(run.status, run.out).toBe(3);
			expect(run.stderr).toContain('does not match its sidecar');
			expect(await publicTableCount(target.url)).toBe(0);

			// a restore that does not hold what the sidecar recorded is reported, and not migrated or passed
			const altered = path.join(dir, 'altered-sidecar.dump');
			copyFileSync(demoBackup, altered);
			const sidecar = JSON.parse(readFileSync(`${demoBackup}.json`, 'utf8')) as backup.BackupSidecar;
			sidecar.rowCounts['public.users'] += 1;
			writeFileSync(`${altered}.json`, JSON.stringify(sidecar));
			const mismatch = await scratchDatabase('mismatch');
			const checked = command('restore', [altered], mismatch.url);
			expect(checked.status, checked.out).toBe(1);
			expect(checked.stderr).toContain('CHECK FAILED');
			expect(checked.stderr).toContain(`public.users: ${sidecar.rowCounts['public.users'] - 1} rows, the backup had ${sidecar.rowCounts['public.users']}`);

			const lone = path.join(dir, 'copied-without-sidecar.dump');
			copyFileSync(demoBackup, lone);
			const refused = command('restore', [lone], target.url);
			expect(refused.status, refused.out).toBe(3);
			expect(refused.stderr).toContain('--unverified');
			const unverified = command('restore', [lone, '--unverified'], target.url);
			expect(unverified.status, unverified.out).toBe(0);
			expect(unverified.stdout).toContain('NOT CHECKED');
			expect(await tableFingerprints(target.url)).toEqual(await tableFingerprints(sourceUrl()));
		} finally {
			rmSync(dir, { recursive: true, force: true });
		}
	});

	it('migrates a backup from the previous migration level forward after checking it', async () => {
		const older = await scratchDatabase('older');
		const folder = migrationsFolderUpTo(previous.tag);
		try {
			await applyMigrations(older.url, folder);
		} finally {
			rmSync(folder, { recursive: true, force: true });
		}
		const dir = mkdtempSync(path.join(os.tmpdir(), 'ebbline-backups-older-'));
		try {
			const taken = command('backup', [], older.url, dir);
			expect(taken.status, taken.out).toBe(0);
			const [file] = dumps(dir);
			expect(file).toContain(`-${previous.tag}.dump`);
			const target = await scratchDatabase('from-older');
			const run = command('restore', [path.join(dir, file)], target.url);
			expect(run.status, run.out).toBe(0);
			expect(run.stdout).toContain('check passed');
			expect(run.stdout).toContain(`migrated forward from ${previous.tag} to ${latest.tag}`);
			expect(await migrationLevel(target.url)).toBe(latest.when);
		} finally {
			rmSync(dir, { recursive: true, force: true });
		}
	});
});

describe('the nightly backup job', { timeout: 120_000 }, () => {
	it('takes a backup and keeps the newest BACKUP_KEEP, leaving other files alone; the Settings status shows it', async () => {
		const dir = mkdtempSync(path.join(os.tmpdir(), 'ebbline-backups-nightly-'));
		const saved = { dir: process.env.BACKUP_DIR, keep: process.env.BACKUP_KEEP };
		try {
			process.env.BACKUP_DIR = dir;
			process.env.BACKUP_KEEP = '2';
			let status = await backup.status(await lastFailedJob(QUEUES.backupNightly));
			expect(status).toMatchObject({ dir, keep: 2, count: 0, last: null });

			const older = ['ebbline-20250101T023000Z-v0.1.0-0000_foundation.dump', 'ebbline-20250102T023000Z-v0.1.0-0000_foundation.dump'];
			for (const f of older) {
				copyFileSync(demoBackup, path.join(dir, f));
				writeFileSync(path.join(dir, `${f}.json`), '{"format":"ebbline-backup-1"}');
			}
			writeFileSync(path.join(dir, 'operator-notes.txt'), 'not a backup');

			const result = (await backupNightly.handler([], undefined as never)) as { file: string; sizeBytes: number; removed: string[] };
			expect(result.removed).toEqual([older[0]]);
			expect(readdirSync(dir).sort()).toEqual([older[1], `${older[1]}.json`, result.file, `${result.file}.json`, 'operator-notes.txt'].sort());
			expect(result.file).toContain(latest.tag);

			status = await backup.status(await lastFailedJob(QUEUES.backupNightly));
			expect(status.count).toBe(2);
			expect(status.last?.file).toBe(result.file);
			expect(status.last?.sizeBytes).toBe(result.sizeBytes);
			expect(status.lastFailure).toBeNull();

			process.env.BACKUP_KEEP = '0';
			expect(await backupNightly.resolveSchedule!()).toBeNull();
			expect(await backupNightly.handler([], undefined as never)).toEqual({ skipped: 'BACKUP_KEEP=0' });
			process.env.BACKUP_KEEP = 'lots';
			expect(() => backup.backupKeep()).toThrow('BACKUP_KEEP=lots');
			expect(existsSync(path.join(dir, result.file))).toBe(true);
		} finally {
			if (saved.dir === undefined) delete process.env.BACKUP_DIR;
			else process.env.BACKUP_DIR = saved.dir;
			if (saved.keep === undefined) delete process.env.BACKUP_KEEP;
			else process.env.BACKUP_KEEP = saved.keep;
			rmSync(dir, { recursive: true, force: true });
		}
	});
});
