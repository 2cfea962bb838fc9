// Checks the database in DATABASE_URL before a start.
//   --production: refuses (exit 3) while demo accounts or demo data are present (npm run serve).
//   --demo:       refuses (exit 3) a DATABASE_URL database that is not already a demo database, unless
//                 EBBLINE_DEMO=1 says to put the demo there (npm start with DATABASE_URL; the private
//                 cluster npm start runs itself is always the demo's).
import { closeDb, getDb } from '../src/lib/server/db';
import { demoContent, isDemoContent, productionRefusal } from '../src/lib/server/ops/preflight';

async function main() {
	const db = getDb();
	if (process.argv.includes('--production')) {
		const refusal = await productionRefusal(db);
		if (refusal) {
			console.error(`[ebbline] ${refusal.split('\n').join('\n[ebbline] ')}`);
			process.exitCode = 3;
		}
		return;
	}
	if (process.argv.includes('--demo')) {
		if (process.env.EBBLINE_DEMO === '1') return;
		const [{ ok }] = Array.from((await db.execute(`select to_regclass('public.users') is not null and to_regclass('public.feed_messages') is not null as ok`)) as unknown as Iterable<{ ok: boolean }>);
		if (ok && isDemoContent(await demoContent(db))) return;
		console.error('[ebbline] npm start is the demo: it seeds invented staff (with a published password) and patients.');
		console.error('[ebbline] The database in DATABASE_URL holds no demo yet, so it may be a real one; nothing was seeded.');
		console.error('[ebbline] For a hospital, use `npm run serve` (see README, "Production start"). To put the demo there anyway, set EBBLINE_DEMO=1.');
		process.exitCode = 3;
	}
}

main()
	.catch((error) => {
		console.error('[ebbline] pre-flight check failed:', error.message);
		process.exitCode = 1;
	})
	.finally(closeDb);
