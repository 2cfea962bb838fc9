// `npm run serve`: the production start. Serves the built app against the hospital's PostgreSQL
// (DATABASE_URL) and SMTP relay (SMTP_URL) at ORIGIN. It migrates, refuses a database that holds demo
// accounts or demo patients, and never seeds, never starts the simulator or the local test mailbox.
import { existsSync } from 'node:fs';
import path from 'node:path';
import { ensureDependencies, log, root, run, startChild, stopChild, waitForPort } from './lib/system.mjs';

const REQUIRED = {
	DATABASE_URL: 'the hospital PostgreSQL, e.g. postgres://ebbline_app:…@db.hospital.example:5432/ebbline',
	ORIGIN: 'the public URL users open, e.g. https://ebbline.hospital.example',
	SMTP_URL: "the hospital's SMTP relay, e.g. smtp://relay.hospital.example:25"
};

let app = null;
let stopping = false;
async function shutdown(code = 0) {
	if (stopping) return;
	stopping = true;
	if (app) await stopChild(app);
	process.exit(code);
}
process.on('SIGINT', () => shutdown(0));
process.on('SIGTERM', () => shutdown(0));

async function main() {
	const missing = Object.entries(REQUIRED).filter(([name]) => !process.env[name]);
	if (missing.length > 0) {
		for (const [name, what] of missing) console.error(`[ebbline] ${name} is not set: ${what}.`);
		console.error('[ebbline] npm run serve is the production start; for the demo use npm start.');
		process.exit(2);
	}
	ensureDependencies();
	const env = { ...process.env, EBBLINE_SIMULATOR: 'off' };
	delete env.EBBLINE_MAILBOX_DIR;
	const tsx = path.join(root, 'node_modules/.bin/tsx');
	run(tsx, ['scripts/migrate.ts'], { env });
	try {
		run(tsx, ['scripts/preflight.ts', '--production'], { env });
	} catch {
		console.error('[ebbline] not started: remove the demo content first (see above).');
		process.exit(3);
	}
	const entry = path.join(root, 'build', 'index.js');
	if (!existsSync(entry)) {
		log('no build yet: building the app (npm run build)');
		run(path.join(root, 'node_modules/.bin/vite'), ['build', '--logLevel', 'warn'], { env });
	}
	const port = Number(env.PORT ?? 3000);
	app = startChild('app', process.execPath, [entry], { env: { ...env, HOST: env.HOST ?? '0.0.0.0', PORT: String(port), BODY_SIZE_LIMIT: env.BODY_SIZE_LIMIT ?? '2M' } });
	app.on('exit', (code) => {
		if (!stopping) {
			log(`the app exited (${code})`);
			process.exit(code ?? 1);
		}
	});
	await waitForPort(port, env.HOST && env.HOST !== '0.0.0.0' ? env.HOST : '127.0.0.1', 60_000);
	log(`Ebbline is serving ${env.ORIGIN} (port ${port}); no demo data, no simulator, mail through SMTP_URL.`);
}

main().catch((error) => {
	console.error(`[ebbline] ${error.message}`);
	shutdown(1);
});
