// Checks the database in DATABASE_URL before a start (src/lib/server/ops/preflight.ts says what counts
// as demo content). Exit 0: go ahead; 3: refused, with the reason on stderr; 1: the check failed.
//   --production: refuses while demo accounts or demo patients are present (npm run serve).
//   --demo:       refuses a DATABASE_URL database that is not already a demo database, unless
//                 EBBLINE_DEMO=1 says to put the demo there (npm start with DATABASE_URL; the private
//                 cluster npm start runs itself is always the demo's).
//   --retire-demo-accounts: deactivates the demo accounts and gives them random passwords, audited
//                 (npm run demo:retire-accounts).
import { closeDb, getDb } from '../src/lib/server/db';
import { demoContent, isDemoContent, productionRefusal, retireDemoAccounts } from '../src/lib/server/ops';

const say = (text: string) =>
	console.error(
		text
			.split('\n')
			.map((line) => `[ebbline] ${line}`)
			.join('\n')
	);

async function main() {
	const db = getDb();
	if (process.argv.includes('--production')) {
		const refusal = await productionRefusal(db);
		if (refusal) {
			say(refusal);
			process.exitCode = 3;
		}
		return;
	}
	if (process.argv.includes('--demo')) {
		if (process.env.EBBLINE_DEMO === '1') return;
		if (isDemoContent(await demoContent(db))) return;
		say(
			[
				'npm start is the demo: it seeds invented staff (with a published password) and invented patients.',
				'The database in DATABASE_URL holds no demo, so it may be a real one: nothing was migrated or seeded.',
				'For a hospital, use `npm run serve` (README, "Production start").',
				'To put the demo in that database anyway, run EBBLINE_DEMO=1 npm start.'
			].join('\n')
		);
		process.exitCode = 3;
		return;
	}
	if (process.argv.includes('--retire-demo-accounts')) {
		const retired = await retireDemoAccounts(db, { actorId: null, actorLabel: 'demo:retire-accounts command', requestId: null });
		console.log(
			retired.length === 0 ? '[ebbline] no demo account can sign in; nothing changed.' : `[ebbline] deactivated, with a random password: ${retired.join(', ')}`
		);
		return;
	}
	say('usage: tsx scripts/preflight.ts --production | --demo | --retire-demo-accounts');
	process.exitCode = 2;
}

main()
	.catch((error) => {
		console.error('[ebbline] pre-flight check failed:', error.message);
		process.exitCode = 1;
	})
	.finally(closeDb);
