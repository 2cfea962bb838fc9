// Backups of the whole database with PostgreSQL's own pg_dump (custom format, compressed), each with a
// JSON sidecar that says what the archive should hold (row counts, a checksum of the audit chain), and
// restores with pg_restore into an empty database only, checked against that sidecar. Relative imports
// only: the backup and restore commands (tsx) and the nightly job (built app) share this module.
import { spawn } from 'node:child_process';
import { createHash } from 'node:crypto';
import { createReadStream, existsSync, mkdirSync, readdirSync, readFileSync, renameSync, rmSync, statSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import postgres from 'postgres';
import journal from '../../../../drizzle/meta/_journal.json';
import packageJson from '../../../../package.json';
import { envNumber } from '../config';

export const EBBLINE_VERSION: string = packageJson.version;
const SIDECAR_FORMAT = 'ebbline-backup-1';
const FILE_PATTERN = /^ebbline-(\d{8}T\d{6}Z)-v[^-]+-(.+)\.dump$/;

type JournalEntry = { idx: number; when: number; tag: string };
const migrations: JournalEntry[] = journal.entries;

/** A refusal in words: the restore (or backup) did nothing and says why. */
export class BackupRefusal extends Error {}

export type MigrationLevel = { tag: string; createdAt: number; known: boolean };

export type BackupSidecar = {
	format: typeof SIDECAR_FORMAT;
	file: string;
	createdAt: string;
	ebblineVersion: string;
	migration: MigrationLevel;
	database: { name: string; serverVersion: string };
	sizeBytes: number;
	sha256: string;
	tookMs: number;
	/** rows per table ("schema.table") in the snapshot the archive was taken from */
	rowCounts: Record<string, number>;
	auditLog: AuditChain;
};

export type AuditChain = { count: number; lastId: number | null; checksum: string };

export type BackupSummary = { file: string; path: string; createdAt: string; sizeBytes: number; migrationTag: string; ebblineVersion: string };

/** BACKUP_DIR (default .data/backups), relative to the folder Ebbline runs in. */
export function backupDir(): string {
	return path.resolve(process.cwd(), process.env.BACKUP_DIR || '.data/backups');
}

/** BACKUP_KEEP: how many nightly backups to keep (default 14); 0 turns the nightly backup off. */
export function backupKeep(): number {
	const keep = envNumber('BACKUP_KEEP', 14);
	if (!Number.isInteger(keep) || keep < 0) {
		throw new Error(`Invalid configuration: BACKUP_KEEP=${process.env.BACKUP_KEEP} is not a whole number of backups (0 turns the nightly backup off).`);
	}
	return keep;
}

/** The newest migration this code knows. */
export function latestKnownMigration(): JournalEntry {
	return migrations[migrations.length - 1];
}

export function levelOf(createdAt: number): MigrationLevel {
	const entry = migrations.find((m) => m.when === createdAt);
	return entry ? { tag: entry.tag, createdAt, known: true } : { tag: `unknown-${createdAt}`, createdAt, known: false };
}

type Sql = postgres.Sql | postgres.TransactionSql;
const connect = (url: string) => postgres(url, { max: 1, onnotice: () => {}, connect_timeout: 10 });

/** The last drizzle migration applied to the database, or null when it has never been migrated. */
async function migrationLevel(sql: Sql): Promise<MigrationLevel | null> {
	const [table] = await sql`select to_regclass('drizzle.__drizzle_migrations') is not null as present`;
	if (!table.present) return null;
	const [row] = await sql`select max(created_at)::bigint as created_at from drizzle.__drizzle_migrations`;
	return row.created_at === null ? null : levelOf(Number(row.created_at));
}

/** Rows of every table in the Ebbline schemas (public, drizzle, pgboss). */
export async function rowCounts(sql: Sql): Promise<Record<string, number>> {
	const tables = await sql<{ schema: string; name: string }[]>`
		select n.nspname as schema, c.relname as name from pg_class c join pg_namespace n on n.oid = c.relnamespace
		where c.relkind in ('r', 'p') and not c.relispartition and n.nspname in ('public', 'drizzle', 'pgboss')
		order by 1, 2`;
	const counts: Record<string, number> = {};
	for (const t of tables) {
		const [row] = await sql.unsafe(`select count(*)::bigint as n from "${t.schema}"."${t.name}"`);
		counts[`${t.schema}.${t.name}`] = Number(row.n);
	}
	return counts;
}

/**
 * A checksum over the audit log in id order: id, time (microseconds since the epoch, independent of the
 * session's time zone), action, object type and id. A restored log that lost, reordered or changed a row
 * does not match.
 */
export async function auditChain(sql: Sql): Promise<AuditChain> {
	const [table] = await sql`select to_regclass('public.audit_log') is not null as present`;
	if (!table.present) return { count: 0, lastId: null, checksum: 'no audit_log table' };
	const [row] = await sql`
		select count(*)::bigint as count, max(id)::bigint as last_id,
		       md5(coalesce(string_agg(id::text || '|' || (extract(epoch from at) * 1000000)::bigint::text || '|' || action || '|' || object_type || '|' || coalesce(object_id, ''), E'\n' order by id), '')) as checksum
		from audit_log`;
	return { count: Number(row.count), lastId: row.last_id === null ? null : Number(row.last_id), checksum: row.checksum };
}

async function serverMajor(sql: Sql): Promise<{ major: number; version: string }> {
	const [row] = await sql`select current_setting('server_version_num')::int as num, current_setting('server_version') as version`;
	return { major: Math.floor(row.num / 10000), version: row.version };
}

/**
 * Debian's client programs for the server's major version (/usr/lib/postgresql/<major>/bin); a newer
 * major also reads and writes an older server's archives, an older one does not.
 */
export function postgresProgram(name: 'pg_dump' | 'pg_restore', major: number): string {
	const base = '/usr/lib/postgresql';
	const versions = existsSync(base)
		? readdirSync(base)
				.map(Number)
				.filter((v) => Number.isInteger(v) && v >= major && existsSync(path.join(base, String(v), 'bin', name)))
				.sort((a, b) => a - b)
		: [];
	if (versions.length === 0) {
		throw new BackupRefusal(
			`${name} for PostgreSQL ${major} or newer was not found under ${base}/<version>/bin: install Debian's client programs (apt-get install postgresql-client-${major}) on this machine.`
		);
	}
	return path.join(base, String(versions[0]), 'bin', name);
}

/** libpq arguments for a URL, with the password in the environment rather than on the command line. */
function libpq(url: string): { dbname: string; env: NodeJS.ProcessEnv } {
	const parsed = new URL(url);
	const password = decodeURIComponent(parsed.password);
	parsed.password = '';
	const env: NodeJS.ProcessEnv = { ...process.env, PGAPPNAME: 'ebbline-backup', PGCONNECT_TIMEOUT: '10' };
	if (password) env.PGPASSWORD = password;
	else delete env.PGPASSWORD;
	return { dbname: parsed.toString(), env };
}

function runProgram(program: string, args: string[], env: NodeJS.ProcessEnv): Promise<string> {
	return new Promise((resolve, reject) => {
		const child = spawn(program, args, { env, stdio: ['ignore', 'pipe', 'pipe'] });
		const out: Buffer[] = [];
		let err = '';
		child.stdout.on('data', (chunk: Buffer) => out.push(chunk));
		child.stderr.on('data', (chunk: Buffer) => (err += chunk.toString()));
		child.on('error', reject);
		child.on('close', (code, signal) => {
			if (code === 0) resolve(Buffer.concat(out).toString('utf8'));
			else reject(new Error(`${path.basename(program)} failed (${code ?? signal}): ${err.trim().split('\n').slice(-5).join(' / ') || 'no message'}`));
		});
	});
}

export function sha256File(file: string): Promise<string> {
	return new Promise((resolve, reject) => {
		const hash = createHash('sha256');
		createReadStream(file)
			.on('data', (chunk) => hash.update(chunk))
			.on('error', reject)
			.on('end', () => resolve(hash.digest('hex')));
	});
}

const stamp = (d: Date) =>
	d
		.toISOString()
		.replace(/[-:]/g, '')
		.replace(/\.\d{3}Z$/, 'Z');

/** `ebbline-<UTC time>-v<version>-<migration tag>.dump`: sorts by time, says what wrote it. */
export function backupFileName(at: Date, level: MigrationLevel): string {
	return `ebbline-${stamp(at)}-v${EBBLINE_VERSION}-${level.tag}.dump`;
}

export type BackupResult = { path: string; sidecarPath: string; sidecar: BackupSidecar };

/**
 * One consistent backup: a read-only repeatable-read transaction exports its snapshot, pg_dump dumps
 * exactly that snapshot, and the counts and audit checksum in the sidecar are read from it too, so the
 * sidecar describes the archive even while the app keeps writing. Written under a temporary name and
 * renamed when complete, so a half-written file never looks like a backup.
 */
export async function takeBackup(options: { databaseUrl: string; dir?: string; now?: Date }): Promise<BackupResult> {
	const dir = options.dir ?? backupDir();
	mkdirSync(dir, { recursive: true });
	const started = Date.now();
	const at = options.now ?? new Date();
	const sql = connect(options.databaseUrl);
	let partial: string | null = null;
	try {
		const server = await serverMajor(sql);
		const pgDump = postgresProgram('pg_dump', server.major);
		const result = await sql.begin('isolation level repeatable read read only', async (tx) => {
			const [{ snapshot }] = await tx`select pg_export_snapshot() as snapshot`;
			const level = await migrationLevel(tx);
			if (!level) {
				throw new BackupRefusal(
					'The database has no Ebbline migrations (drizzle.__drizzle_migrations is missing or empty): is DATABASE_URL an Ebbline database?'
				);
			}
			const [{ name }] = await tx`select current_database() as name`;
			const counts = await rowCounts(tx);
			const chain = await auditChain(tx);
			const file = backupFileName(at, level);
			partial = path.join(dir, `.${file}.partial`);
			const { dbname, env } = libpq(options.databaseUrl);
			await runProgram(
				pgDump,
				['--format=custom', '--compress=6', '--lock-wait-timeout=60000', `--snapshot=${snapshot}`, '--no-password', `--file=${partial}`, `--dbname=${dbname}`],
				env
			);
			return { file, level, name: name as string, counts, chain };
		});
		const target = path.join(dir, result.file);
		const sidecar: BackupSidecar = {
			format: SIDECAR_FORMAT,
			file: result.file,
			createdAt: at.toISOString(),
			ebblineVersion: EBBLINE_VERSION,
			migration: result.level,
			database: { name: result.name, serverVersion: server.version },
			sizeBytes: statSync(partial!).size,
			sha256: await sha256File(partial!),
			tookMs: Date.now() - started,
			rowCounts: result.counts,
			auditLog: result.chain
		};
		renameSync(partial!, target);
		partial = null;
		const sidecarPath = `${target}.json`;
		writeFileSync(sidecarPath, JSON.stringify(sidecar, null, 2) + '\n');
		return { path: target, sidecarPath, sidecar };
	} finally {
		if (partial) rmSync(partial, { force: true });
		await sql.end({ timeout: 5 });
	}
}

/** Backups in the folder, newest first: archives named like ours, with what their sidecars say. */
export function listBackups(dir = backupDir()): BackupSummary[] {
	if (!existsSync(dir)) return [];
	const found: BackupSummary[] = [];
	for (const file of readdirSync(dir)) {
		const match = FILE_PATTERN.exec(file);
		if (!match) continue;
		const full = path.join(dir, file);
		// the file name says enough when a sidecar is missing or unreadable; restore checks it properly
		let sidecar: Partial<BackupSidecar> | null;
		try {
			sidecar = readSidecar(full);
		} catch {
			sidecar = null;
		}
		found.push({
			file,
			path: full,
			createdAt: sidecar?.createdAt ?? match[1].replace(/^(\d{4})(\d\d)(\d\d)T(\d\d)(\d\d)(\d\d)Z$/, '$1-$2-$3T$4:$5:$6.000Z'),
			sizeBytes: statSync(full).size,
			migrationTag: sidecar?.migration?.tag ?? match[2],
			ebblineVersion: sidecar?.ebblineVersion ?? ''
		});
	}
	return found.sort((a, b) => b.file.localeCompare(a.file));
}

/** Keeps the newest `keep` backups (archive and sidecar); removes only files named like ours. */
export function pruneBackups(keep: number, dir = backupDir()): string[] {
	const removed: string[] = [];
	for (const old of listBackups(dir).slice(keep)) {
		rmSync(old.path, { force: true });
		rmSync(`${old.path}.json`, { force: true });
		removed.push(old.file);
	}
	return removed;
}

export function readSidecar(file: string): BackupSidecar | null {
	const sidecarPath = `${file}.json`;
	if (!existsSync(sidecarPath)) return null;
	const parsed = JSON.parse(readFileSync(sidecarPath, 'utf8')) as BackupSidecar;
	if (parsed.format !== SIDECAR_FORMAT) throw new BackupRefusal(`${sidecarPath} is not an Ebbline backup sidecar (format ${String(parsed.format)}).`);
	return parsed;
}

/** The migration level recorded inside an archive: its copy of drizzle.__drizzle_migrations. */
export async function archiveMigrationLevel(file: string, pgRestore: string): Promise<MigrationLevel | null> {
	const text = await runProgram(pgRestore, ['--data-only', '--schema=drizzle', '--table=__drizzle_migrations', '--file=-', file], process.env);
	const lines = text.split('\n');
	const start = lines.findIndex((l) => l.startsWith('COPY drizzle.__drizzle_migrations '));
	if (start < 0) return null;
	const columns = /\(([^)]*)\)/
		.exec(lines[start])![1]
		.split(',')
		.map((c) => c.trim());
	const at = columns.indexOf('created_at');
	let newest: number | null = null;
	for (const line of lines.slice(start + 1)) {
		if (line === '\\.') break;
		const value = Number(line.split('\t')[at]);
		if (Number.isFinite(value) && (newest === null || value > newest)) newest = value;
	}
	return newest === null ? null : levelOf(newest);
}

/** What an empty target must not hold: tables or views (public ones first), or schemas of its own. */
async function contentsOf(sql: Sql): Promise<string[]> {
	const relations = await sql<{ name: string }[]>`
		select n.nspname || '.' || c.relname as name from pg_class c join pg_namespace n on n.oid = c.relnamespace
		where c.relkind in ('r', 'p', 'v', 'm', 'f') and not c.relispartition and n.nspname not in ('pg_catalog', 'information_schema')
		  and n.nspname not like 'pg\_toast%' and n.nspname not like 'pg\_temp%'
		order by n.nspname <> 'public', 1`;
	const schemas = await sql<{ name: string }[]>`
		select nspname as name from pg_namespace
		where nspname not in ('public', 'pg_catalog', 'information_schema') and nspname not like 'pg\_%'
		order by 1`;
	return [...relations.map((r) => r.name), ...schemas.map((s) => `schema ${s.name}`)];
}

export type RestoreReport = {
	file: string;
	database: string;
	backupLevel: MigrationLevel;
	verified: boolean;
	mismatches: string[];
	tablesChecked: number;
	auditLog: AuditChain;
	migratedTo: string | null;
	tookMs: number;
};

/**
 * Restores an archive into an empty database: refuses a non-empty target, an archive whose migration
 * level this code does not know (a newer Ebbline wrote it), and an archive that no longer matches its
 * sidecar's sha256; restores in one transaction; compares the restored row counts and audit checksum
 * with the sidecar; and only then brings an older archive up to date with `migrate`.
 */
export async function restoreBackup(options: {
	file: string;
	databaseUrl: string;
	migrate: (databaseUrl: string) => Promise<void>;
	unverified?: boolean;
}): Promise<RestoreReport> {
	const started = Date.now();
	const file = path.resolve(options.file);
	if (!existsSync(file) || !statSync(file).isFile()) throw new BackupRefusal(`No backup file at ${file}.`);
	const sidecar = readSidecar(file);
	if (!sidecar && !options.unverified) {
		throw new BackupRefusal(
			`No sidecar ${path.basename(file)}.json next to the backup, so the restore could not be checked. Copy the sidecar beside it, or pass --unverified to restore without the check.`
		);
	}
	if (sidecar) {
		const actual = await sha256File(file);
		if (actual !== sidecar.sha256) {
			throw new BackupRefusal(
				`${path.basename(file)} does not match its sidecar (sha256 ${actual}, expected ${sidecar.sha256}): the file was damaged or changed after the backup. Nothing was restored.`
			);
		}
	}
	const sql = connect(options.databaseUrl);
	let database: string;
	try {
		const [{ name }] = await sql`select current_database() as name`;
		database = name;
		const server = await serverMajor(sql);
		const pgRestore = postgresProgram('pg_restore', server.major);
		const level = await archiveMigrationLevel(file, pgRestore);
		if (!level) throw new BackupRefusal(`${path.basename(file)} holds no drizzle.__drizzle_migrations rows: it is not a backup of an Ebbline database.`);
		if (!level.known) {
			const latest = latestKnownMigration();
			const wrote = sidecar
				? `Ebbline ${sidecar.ebblineVersion} at migration ${sidecar.migration.tag}`
				: `a migration made at ${new Date(level.createdAt).toISOString()}`;
			throw new BackupRefusal(
				`${path.basename(file)} was written by ${wrote}, which this Ebbline (${EBBLINE_VERSION}, newest migration ${latest.tag}) does not know: it is newer than this code. Restore it with that version of Ebbline or a later one. Nothing was restored.`
			);
		}
		const contents = await contentsOf(sql);
		if (contents.length > 0) {
			const shown = contents.slice(0, 6).join(', ') + (contents.length > 6 ? `, and ${contents.length - 6} more` : '');
			throw new BackupRefusal(
				`Database ${database} is not empty (${shown}). A restore goes into an empty database only, so that nothing is overwritten or mixed: create a new one (createdb) and restore into it. Nothing was restored.`
			);
		}
		const { dbname, env } = libpq(options.databaseUrl);
		await runProgram(pgRestore, ['--exit-on-error', '--single-transaction', '--no-owner', '--no-privileges', '--no-password', `--dbname=${dbname}`, file], env);

		const counts = await rowCounts(sql);
		const chain = await auditChain(sql);
		const mismatches: string[] = [];
		if (sidecar) {
			for (const [table, expected] of Object.entries(sidecar.rowCounts)) {
				if (counts[table] !== expected) mismatches.push(`${table}: ${counts[table] ?? 'missing'} rows, the backup had ${expected}`);
			}
			for (const table of Object.keys(counts)) if (!(table in sidecar.rowCounts)) mismatches.push(`${table}: not in the backup's sidecar`);
			if (chain.count !== sidecar.auditLog.count || chain.checksum !== sidecar.auditLog.checksum) {
				mismatches.push(
					`audit log: ${chain.count} rows, checksum ${chain.checksum}; the backup had ${sidecar.auditLog.count} rows, checksum ${sidecar.auditLog.checksum}`
				);
			}
		}
		let migratedTo: string | null = null;
		const latest = latestKnownMigration();
		if (mismatches.length === 0 && level.createdAt !== latest.when) {
			await options.migrate(options.databaseUrl);
			migratedTo = (await migrationLevel(sql))?.tag ?? null;
		}
		return {
			file,
			database,
			backupLevel: level,
			verified: Boolean(sidecar) && mismatches.length === 0,
			mismatches,
			tablesChecked: sidecar ? Object.keys(sidecar.rowCounts).length : 0,
			auditLog: chain,
			migratedTo,
			tookMs: Date.now() - started
		};
	} finally {
		await sql.end({ timeout: 5 });
	}
}

export type BackupStatus = {
	dir: string;
	keep: number;
	count: number;
	last: Omit<BackupSummary, 'path'> | null;
	/** the newest nightly run, when it failed after the last backup */
	lastFailure: { at: string; message: string } | null;
	configError: string | null;
};

/**
 * What the Settings page shows: the newest backup in BACKUP_DIR, how many there are and are kept, and
 * `lastFailedRun` (the backup.nightly job that failed last, read by the queue layer) if it is newer.
 */
export async function status(lastFailedRun: { at: Date; output: unknown } | null): Promise<BackupStatus> {
	const dir = backupDir();
	let keep = 14;
	let configError: string | null = null;
	try {
		keep = backupKeep();
	} catch (error) {
		configError = (error as Error).message;
	}
	let backups: BackupSummary[] = [];
	try {
		backups = listBackups(dir);
	} catch (error) {
		configError ??= `${dir} could not be read: ${(error as Error).message}`;
	}
	const newest = backups[0];
	const last = newest
		? { file: newest.file, createdAt: newest.createdAt, sizeBytes: newest.sizeBytes, migrationTag: newest.migrationTag, ebblineVersion: newest.ebblineVersion }
		: null;
	let lastFailure: BackupStatus['lastFailure'] = null;
	if (lastFailedRun && (!last || lastFailedRun.at.getTime() > new Date(last.createdAt).getTime())) {
		const output = lastFailedRun.output as { message?: string } | null;
		lastFailure = { at: lastFailedRun.at.toISOString(), message: output?.message ?? 'no message recorded' };
	}
	return { dir, keep, count: backups.length, last, lastFailure, configError };
}
