// `npm start`: dependencies, private PostgreSQL, migrations, demo data, local mailbox, build, serve.
// Ctrl-C or SIGTERM stops everything this command started, and nothing else.
import { spawnSync } from 'node:child_process';
import path from 'node:path';
import { buildIsStale, dataDir, ensureDependencies, log, root, run, startChild, stopChild, waitForPort } from './lib/system.mjs';

const appPort = Number(process.env.EBBLINE_PORT ?? 3000);
const smtpPort = Number(process.env.FAKE_SMTP_PORT ?? 2525);
const origin = process.env.ORIGIN ?? `http://127.0.0.1:${appPort}`;
const children = [];
let postgres = null;
let stopping = false;

async function shutdown(code = 0) {
	if (stopping) return;
	stopping = true;
	log('stopping');
	for (const child of children.reverse()) await stopChild(child);
	if (postgres?.startedHere) postgres.stop();
	process.exit(code);
}
process.on('SIGINT', () => shutdown(0));
process.on('SIGTERM', () => shutdown(0));

async function main() {
	ensureDependencies();
	const env = { ...process.env };
	if (!env.DATABASE_URL) {
		const { ensurePostgres } = await import('./lib/postgres.mjs');
		const { createDatabaseIfMissing } = await import('./lib/database.mjs');
		postgres = ensurePostgres();
		await createDatabaseIfMissing(postgres.url('postgres'), 'ebbline');
		env.DATABASE_URL = postgres.url('ebbline');
	} else {
		log('using the PostgreSQL server in DATABASE_URL (the demo goes there only if it is a demo database or EBBLINE_DEMO=1)');
	}
	const tsx = path.join(root, 'node_modules/.bin/tsx');
	// the demo never migrates or seeds a database it was not made for: a DATABASE_URL may be a hospital's
	if (process.env.DATABASE_URL) {
		const check = spawnSync(tsx, ['scripts/preflight.ts', '--demo'], { stdio: 'inherit', cwd: root, env }).status;
		if (check !== 0) return shutdown(check === 3 ? 3 : 1);
	}
	run(tsx, ['scripts/migrate.ts'], { env });
	run(tsx, ['scripts/seed.ts'], { env });

	if (!env.SMTP_URL) {
		env.EBBLINE_MAILBOX_DIR ??= path.join(dataDir, 'mailbox');
		const smtp = startChild('mail', tsx, ['scripts/fake-smtp.ts'], {
			env: { ...env, FAKE_SMTP_PORT: String(smtpPort) }
		});
		children.push(smtp);
		await waitForPort(smtpPort);
		env.SMTP_URL = `smtp://127.0.0.1:${smtpPort}`;
	}

	const outDir = path.join(root, 'build');
	if (buildIsStale(outDir)) {
		log('building the app');
		run(path.join(root, 'node_modules/.bin/vite'), ['build', '--logLevel', 'warn'], { env });
	}

	const app = startChild('app', process.execPath, [path.join(outDir, 'index.js')], {
		env: {
			...env,
			HOST: '127.0.0.1',
			PORT: String(appPort),
			ORIGIN: origin,
			BODY_SIZE_LIMIT: env.BODY_SIZE_LIMIT ?? '2M',
			EBBLINE_SIMULATOR: env.EBBLINE_SIMULATOR ?? 'on'
		}
	});
	children.push(app);
	app.on('exit', (code) => {
		if (!stopping) {
			log(`the app exited (${code}); stopping the rest`);
			shutdown(code ?? 1);
		}
	});
	await waitForPort(appPort, '127.0.0.1', 60_000);
	log(`Ebbline is running at ${origin}`);
	log('Demo sign-ins (password for all: larkspur-demo-2026):');
	log('  pharmacist  pharmacist@larkspur.test');
	log('  physician   physician@larkspur.test');
	log('  admin       admin@larkspur.test');
	if (env.EBBLINE_MAILBOX_DIR) log(`Outgoing e-mail is kept in the local mailbox: ${origin}/dev/mail`);
	log('Press Ctrl-C to stop.');
}

main().catch((error) => {
	console.error(`[ebbline] ${error.message}`);
	shutdown(1);
});
