// Seeds the invented Larkspur Bay Hospital demo data, once. `npm run seed -- --reset` rebuilds the
// database from the migrations first (the audit log cannot be emptied row by row, by design).
import { sql } from 'drizzle-orm';
import { closeDb, getDb } from '../src/lib/server/db';
import { seedDemo } from '../src/lib/server/demo';
import { migrateDatabase } from './migrate';

async function main() {
	if (process.argv.includes('--reset')) {
		console.log('[ebbline] --reset: dropping all Ebbline tables and queues, then migrating again');
		const db = getDb();
		await db.execute(sql`drop schema if exists public cascade`);
		await db.execute(sql`drop schema if exists drizzle cascade`);
		await db.execute(sql`drop schema if exists pgboss cascade`);
		await db.execute(sql`create schema public`);
		await migrateDatabase();
	}
	const summary = await seedDemo();
	console.log(
		`[ebbline] demo data: ${Object.entries(summary)
			.map(([k, v]) => `${k} ${v}`)
			.join(', ')}`
	);
}

main()
	.catch((error) => {
		console.error('[ebbline] seeding failed:', error);
		process.exitCode = 1;
	})
	.finally(closeDb);
