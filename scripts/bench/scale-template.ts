// The scale bench's template: the demo staff, rules and agents, then `--days N` (default 30) of the
// Larkspur Bay Hospital played through the feed, the rules and the team's work (src/lib/server/demo/history.ts),
// ending at `--now` (ISO time; default: now). Prints one `TEMPLATE {json}` line with the history's summary.
import { closeDb, useAsyncCommit } from '../../src/lib/server/db';
import { playHistory, seedAgents, seedUsers } from '../../src/lib/server/demo';
import { seedDefaultVersion } from '../../src/lib/server/rules';
import { stopBoss, useJobs } from '../../src/lib/server/queue';
import { jobs } from '../../jobs/registry';

const argument = (name: string) => {
	const i = process.argv.indexOf(`--${name}`);
	return i >= 0 ? process.argv[i + 1] : undefined;
};

async function main() {
	useAsyncCommit();
	useJobs(async () => jobs);
	await seedUsers();
	await seedDefaultVersion();
	await seedAgents();
	const now = new Date(argument('now') ?? Date.now());
	const days = Number(argument('days') ?? 30);
	const summary = await playHistory({ days, now });
	console.log(`TEMPLATE ${JSON.stringify({ now: now.toISOString(), ...summary })}`);
}

main()
	.catch((error) => {
		console.error(error);
		process.exitCode = 1;
	})
	.finally(async () => {
		await stopBoss();
		await closeDb();
	});
