// Each integration test file gets its own database, cloned from the migrated template that
// `npm test` prepared, so files never see each other's rows (the audit log cannot be emptied).
// As in production, DATABASE_URL logs in as the app role and DATABASE_OWNER_URL as the owner role.
import postgres from 'postgres';
import { afterAll } from 'vitest';

const adminUrl = process.env.EBBLINE_TEST_ADMIN_URL;
const template = process.env.EBBLINE_TEST_TEMPLATE_DB;
if (!adminUrl || !template || !process.env.DATABASE_URL || !process.env.DATABASE_OWNER_URL) {
	throw new Error('Integration tests need EBBLINE_TEST_ADMIN_URL, EBBLINE_TEST_TEMPLATE_DB, DATABASE_URL and DATABASE_OWNER_URL: run them with `npm test`.');
}

const name = `${template}_${Math.random().toString(36).slice(2, 10)}`;
/** The same login to this file's database. */
const toThisDatabase = (url: string) => {
	const u = new URL(url);
	u.pathname = `/${name}`;
	return u.toString();
};
const appUrl = toThisDatabase(process.env.DATABASE_URL);
const ownerUrl = toThisDatabase(process.env.DATABASE_OWNER_URL);
const owner = decodeURIComponent(new URL(ownerUrl).username);

const admin = postgres(adminUrl, { max: 1, onnotice: () => {} });
await admin.unsafe(`create database "${name}" template "${template}" owner "${owner}"`);
await admin.end();

process.env.DATABASE_URL = appUrl;
process.env.DATABASE_OWNER_URL = ownerUrl;

afterAll(async () => {
	const { closeDb } = await import('../../src/lib/server/db');
	await closeDb();
	const cleanup = postgres(adminUrl, { max: 1, onnotice: () => {} });
	await cleanup.unsafe(`drop database if exists "${name}" with (force)`);
	await cleanup.end();
});
