// Seeds the invented Larkspur Bay Hospital demo data, once: `--days N` days of history (default 90;
// 0 for today's inpatients only). `npm run seed -- --reset` rebuilds the database from the migrations
// first (the audit log cannot be emptied row by row, by design), as the owner role (DATABASE_OWNER_URL);
// the demo itself is written as the app role (DATABASE_URL), through the app's own services.
import { sql } from 'drizzle-orm';
import { closeDb, createDatabase, useAsyncCommit } from '../src/lib/server/db';
import { ownerDatabaseUrl } from '../src/lib/server/config';
import { DEMO_HISTORY_DAYS, seedDemo } from '../src/lib/server/demo';
import { stopBoss, useJobs } from '../src/lib/server/queue';
import { jobs } from '../jobs/registry';
import { migrateDatabase } from './migrate';

function daysArgument(): number {
	const i = process.argv.indexOf('--days');
	const raw = i >= 0 ? process.argv[i + 1] : (process.argv.find((a) => a.startsWith('--days='))?.slice('--days='.length) ?? process.env.EBBLINE_DEMO_DAYS);
	if (raw === undefined) return DEMO_HISTORY_DAYS;
	const days = Number(raw);
	if (!Number.isInteger(days) || days < 0 || days > 400) throw new Error(`--days: give a whole number of days from 0 to 400 (got "${raw}")`);
	return days;
}

async function main() {
	const days = daysArgument();
	// a seed that dies half-way is redone with --reset: it need not wait for the disk at every commit
	useAsyncCommit();
	if (process.argv.includes('--reset')) {
		console.log('[ebbline] --reset: dropping all Ebbline tables and queues, then migrating again');
		// as the owner (DATABASE_OWNER_URL): the app role may not drop what it does not own
		const owner = createDatabase(ownerDatabaseUrl(), { max: 1 });
		try {
			await owner.execute(sql`drop schema if exists public cascade`);
			await owner.execute(sql`drop schema if exists drizzle cascade`);
			await owner.execute(sql`drop schema if exists pgboss cascade`);
			await owner.execute(sql`create schema public`);
		} finally {
			await owner.$client.end({ timeout: 5 });
		}
		await migrateDatabase();
	}
	// the history queues its e-mail (already delivered, as it was then) with each queue's own policy
	useJobs(async () => jobs);
	let shown = -1;
	const summary = await seedDemo({
		days,
		onProgress: ({ day, days: total }) => {
			const tenth = Math.floor((10 * day) / total);
			if (tenth > shown) {
				shown = tenth;
				console.log(`[ebbline] demo history: day ${day} of ${total}`);
			}
		}
	});
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
	.finally(async () => {
		await stopBoss();
		await closeDb();
	});
