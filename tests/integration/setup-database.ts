// Each integration test file gets its own database, cloned from the migrated template that
// `npm test` prepared, so files never see each other's rows (the audit log cannot be emptied).
import postgres from 'postgres';
import { afterAll } from 'vitest';

const adminUrl = process.env.EBBLINE_TEST_ADMIN_URL;
const template = process.env.EBBLINE_TEST_TEMPLATE_DB;
if (!adminUrl || !template) {
	throw new Error('Integration tests need EBBLINE_TEST_ADMIN_URL and EBBLINE_TEST_TEMPLATE_DB: run them with `npm test`.');
}

const name = `${template}_${Math.random().toString(36).slice(2, 10)}`;
const admin = postgres(adminUrl, { max: 1, onnotice: () => {} });
await admin.unsafe(`create database "${name}" template "${template}"`);
await admin.end();

const url = new URL(adminUrl);
url.pathname = `/${name}`;
process.env.DATABASE_URL = url.toString();

afterAll(async () => {
	const { closeDb } = await import('../../src/lib/server/db');
	await closeDb();
	const cleanup = postgres(adminUrl, { max: 1, onnotice: () => {} });
	await cleanup.unsafe(`drop database if exists "${name}" with (force)`);
	await cleanup.end();
});
