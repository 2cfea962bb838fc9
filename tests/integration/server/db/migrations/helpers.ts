// Scratch databases for migration tests: each is created on the test cluster through the admin URL,
// brought to a chosen migration with drizzle's own migrator, filled from a dump with psql, and dropped.
import { spawnSync } from 'node:child_process';
import { copyFileSync, existsSync, mkdirSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { gunzipSync } from 'node:zlib';
import { drizzle } from 'drizzle-orm/postgres-js';
import { migrate } from 'drizzle-orm/postgres-js/migrator';
import postgres from 'postgres';

export const repoRoot = fileURLToPath(new URL('../../../../../', import.meta.url));
export const drizzleFolder = path.join(repoRoot, 'drizzle');

function adminUrl(): string {
	const url = process.env.EBBLINE_TEST_ADMIN_URL;
	if (!url) throw new Error('Migration tests need EBBLINE_TEST_ADMIN_URL: run them with `npm test`.');
	return url;
}

async function asAdmin<T>(fn: (sql: postgres.Sql) => Promise<T>): Promise<T> {
	const sql = postgres(adminUrl(), { max: 1, onnotice: () => {} });
	try {
		return await fn(sql);
	} finally {
		await sql.end({ timeout: 5 });
	}
}

export interface ScratchDatabase {
	name: string;
	url: string;
}

/** A new empty database (or a copy of `template`, which must have no open connections). */
export async function createScratchDatabase(label: string, template?: string): Promise<ScratchDatabase> {
	// named after the run's template database, so the test runner's clean-up also drops any left behind
	const prefix = process.env.EBBLINE_TEST_TEMPLATE_DB ?? 'ebbline_test';
	const name = `${prefix}_mig_${label}_${Math.random().toString(36).slice(2, 8)}`;
	await asAdmin((sql) => sql.unsafe(`create database "${name}"${template ? ` template "${template}"` : ''}`));
	const url = new URL(adminUrl());
	url.pathname = `/${name}`;
	return { name, url: url.toString() };
}

export async function dropScratchDatabase(db: ScratchDatabase | undefined) {
	if (!db) return;
	await asAdmin((sql) => sql.unsafe(`drop database if exists "${db.name}" with (force)`));
}

interface Journal {
	entries: { idx: number; tag: string }[];
}

/**
 * A migrations folder holding the committed migrations up to and including `lastTag`, with a journal
 * trimmed to match: drizzle's migrator applies whatever the journal lists. Remove it with rmSync.
 */
export function migrationsFolderUpTo(lastTag: string): string {
	const journal = JSON.parse(readFileSync(path.join(drizzleFolder, 'meta/_journal.json'), 'utf8')) as Journal;
	const last = journal.entries.findIndex((e) => e.tag === lastTag);
	if (last < 0) throw new Error(`migration ${lastTag} is not in drizzle/meta/_journal.json`);
	const folder = mkdtempSync(path.join(os.tmpdir(), 'ebbline-migrations-'));
	mkdirSync(path.join(folder, 'meta'));
	const entries = journal.entries.slice(0, last + 1);
	for (const e of entries) copyFileSync(path.join(drizzleFolder, `${e.tag}.sql`), path.join(folder, `${e.tag}.sql`));
	writeFileSync(path.join(folder, 'meta/_journal.json'), JSON.stringify({ ...journal, entries }, null, 2));
	return folder;
}

export async function applyMigrations(url: string, migrationsFolder: string) {
	const client = postgres(url, { max: 1, onnotice: () => {} });
	try {
		await migrate(drizzle(client), { migrationsFolder });
	} finally {
		await client.end({ timeout: 5 });
	}
}

export function removeFolder(folder: string | undefined) {
	if (folder) rmSync(folder, { recursive: true, force: true });
}

function psqlPath(): string {
	// Debian's own psql 15 understands the dump's \restrict line; the PATH one is Debian's wrapper.
	const debian = '/usr/lib/postgresql/15/bin/psql';
	return existsSync(debian) ? debian : 'psql';
}

/** Restores a gzipped plain-text dump with psql, stopping at the first error. */
export function restoreDump(url: string, gzFile: string) {
	const result = spawnSync(psqlPath(), ['-X', '-q', '-v', 'ON_ERROR_STOP=1', '-d', url, '-f', '-'], {
		input: gunzipSync(readFileSync(gzFile)),
		encoding: 'utf8',
		maxBuffer: 64 * 1024 * 1024
	});
	if (result.error) throw result.error;
	if (result.status !== 0) throw new Error(`psql could not restore ${path.basename(gzFile)}: ${result.stderr.trim()}`);
}
