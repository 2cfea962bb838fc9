// `npm run serve`: the production start. Serves the built app (build/, adapter-node) against the
// hospital's PostgreSQL (DATABASE_URL, the app role's login; DATABASE_OWNER_URL, the owner's, which
// migrates and which the app process is not given) and SMTP relay (SMTP_URL) at ORIGIN. It checks the
// database for demo content first and refuses it, then migrates and serves. It never seeds, never starts the
// simulator or the local test mailbox, never installs dependencies and starts no database.
import { spawnSync } from 'node:child_process';
import { existsSync } from 'node:fs';
import path from 'node:path';
import { buildIsStale, log, root, run, startChild, stopChild, waitForPort } from './lib/system.mjs';

const REQUIRED = {
	DATABASE_URL: 'set it to the hospital PostgreSQL, e.g. postgres://ebbline:…@db.hospital.example:5432/ebbline',
	ORIGIN: 'set it to the public URL users open, e.g. https://ebbline.hospital.example',
	SMTP_URL: "set it to the hospital's SMTP relay, e.g. smtp://relay.hospital.example:25"
};

/** Each problem with the configuration, naming the variable and how to set it. */
function configurationProblems(env) {
	const problems = [];
	for (const [name, how] of Object.entries(REQUIRED)) {
		if (!env[name]) problems.push(`${name} is not set: ${how}.`);
	}
	const url = (name) => {
		try {
			return new URL(env[name]);
		} catch {
			return null;
		}
	};
	if (env.DATABASE_URL && !['postgres:', 'postgresql:'].includes(url('DATABASE_URL')?.protocol)) {
		problems.push(`DATABASE_URL is not a PostgreSQL URL: ${REQUIRED.DATABASE_URL}.`);
	}
	if (env.DATABASE_OWNER_URL) {
		const owner = url('DATABASE_OWNER_URL');
		const app = url('DATABASE_URL');
		const where = (u) => `${u.hostname.toLowerCase()}:${u.port || '5432'}${decodeURIComponent(u.pathname)}`;
		if (!owner || !['postgres:', 'postgresql:'].includes(owner.protocol)) {
			problems.push(
				"DATABASE_OWNER_URL is not a PostgreSQL URL: set it to the owner role's login, e.g. postgres://ebbline_owner:…@db.hospital.example:5432/ebbline."
			);
		} else if (app && where(owner) !== where(app)) {
			problems.push(
				`DATABASE_OWNER_URL names ${where(owner)} but DATABASE_URL names ${where(app)}: both must name the same database (README, "Database roles").`
			);
		}
	}
	if (env.ORIGIN) {
		const origin = url('ORIGIN');
		if (!origin || !['http:', 'https:'].includes(origin.protocol) || origin.origin !== env.ORIGIN.replace(/\/$/, '')) {
			problems.push(`ORIGIN=${env.ORIGIN} is not an origin (scheme, host and port only, no path): ${REQUIRED.ORIGIN}.`);
		}
	}
	if (env.SMTP_URL && !['smtp:', 'smtps:'].includes(url('SMTP_URL')?.protocol)) {
		problems.push(`SMTP_URL is not an smtp:// or smtps:// URL: ${REQUIRED.SMTP_URL}.`);
	}
	if (env.EBBLINE_DEV_MAILBOX && env.EBBLINE_DEV_MAILBOX !== 'off') {
		problems.push(
			`EBBLINE_DEV_MAILBOX=${env.EBBLINE_DEV_MAILBOX} shows the development mailbox page (/dev/mail): unset it (it is for npm start and the tests only).`
		);
	}
	// administrators must have a second factor here, so its secrets' key is always needed
	if (!env.EBBLINE_TOTP_KEY) {
		problems.push(
			'EBBLINE_TOTP_KEY is not set: set it to 32 random bytes in base64 (openssl rand -base64 32); it encrypts second-factor secrets — keep it with the backups, apart from them.'
		);
	} else if (Buffer.from(env.EBBLINE_TOTP_KEY, 'base64').length !== 32) {
		problems.push('EBBLINE_TOTP_KEY is not 32 bytes in base64: make one with openssl rand -base64 32.');
	}
	if (env.EBBLINE_ADMIN_TOTP && env.EBBLINE_ADMIN_TOTP !== 'required') {
		problems.push(
			`EBBLINE_ADMIN_TOTP=${env.EBBLINE_ADMIN_TOTP} lets administrators sign in without a second factor: unset it (it is for npm start and the tests only).`
		);
	}
	if (env.EBBLINE_WORKERS && !['embedded', 'off'].includes(env.EBBLINE_WORKERS)) {
		problems.push(
			`EBBLINE_WORKERS=${env.EBBLINE_WORKERS} is neither embedded (workers in the web process, the default) nor off (run npm run worker beside it).`
		);
	}
	return problems;
}

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
	const problems = configurationProblems(process.env);
	if (problems.length > 0) {
		for (const problem of problems) console.error(`[ebbline] ${problem}`);
		console.error('[ebbline] npm run serve is the production start (README, "Production start"); for the demo, use npm start.');
		process.exit(2);
	}
	const tsx = path.join(root, 'node_modules/.bin/tsx');
	if (!existsSync(tsx)) {
		console.error('[ebbline] the dependencies are not installed: run npm ci first.');
		process.exit(2);
	}
	// the simulator and the local mailbox are the demo's; ORIGIN and SMTP_URL come from the operator
	const env = { ...process.env, EBBLINE_SIMULATOR: 'off' };
	delete env.EBBLINE_MAILBOX_DIR;
	delete env.EBBLINE_DEV_MAILBOX;

	if (!env.DATABASE_OWNER_URL || env.DATABASE_OWNER_URL === env.DATABASE_URL) {
		for (const line of [
			'WARNING: DATABASE_OWNER_URL is not set, so the app connects as the role that owns the tables.',
			"WARNING: that role can drop the audit log's triggers, truncate it or drop tables: the append-only logs hold only while nobody uses it so.",
			'WARNING: give the app a role of its own (README, "Database roles") and set DATABASE_OWNER_URL to the owner\'s login.'
		])
			console.error(`[ebbline] ${line}`);
	}

	// before migrating, so a refused database is left as it was
	const check = spawnPreflight(tsx, env);
	if (check !== 0) {
		console.error(
			check === 3
				? '[ebbline] not started: the database holds demo content (above).'
				: '[ebbline] not started: the pre-flight check could not read the database (above).'
		);
		process.exit(check === 3 ? 3 : 1);
	}
	run(tsx, ['scripts/migrate.ts'], { env });

	const entry = path.join(root, 'build', 'index.js');
	if (!existsSync(entry)) {
		log('no build yet: building the app (npm run build)');
		run(path.join(root, 'node_modules/.bin/vite'), ['build', '--logLevel', 'warn'], { env });
	} else if (existsSync(path.join(root, '.git')) && buildIsStale(path.join(root, 'build'))) {
		log('warning: build/ is older than the sources; run npm run build and restart to serve the current code');
	}

	const host = env.HOST ?? '0.0.0.0';
	const port = Number(env.PORT ?? 3000);
	// the app never holds the owner's password
	const appEnv = { ...env, HOST: host, PORT: String(port), BODY_SIZE_LIMIT: env.BODY_SIZE_LIMIT ?? '2M' };
	delete appEnv.DATABASE_OWNER_URL;
	app = startChild('app', process.execPath, [entry], { env: appEnv });
	app.on('exit', (code) => {
		if (!stopping) {
			log(`the app exited (${code})`);
			process.exit(code ?? 1);
		}
	});
	await waitForPort(port, host === '0.0.0.0' || host === '::' ? '127.0.0.1' : host, 60_000);
	const workers = env.EBBLINE_WORKERS === 'off' ? 'off (run npm run worker beside it)' : 'embedded';
	log(`Ebbline is serving ${env.ORIGIN} on ${host}:${port}; workers ${workers}; mail through SMTP_URL; no demo data, no simulator.`);
}

/** The production pre-flight (scripts/preflight.ts): 0 to go ahead, 3 refused, anything else could not check. */
function spawnPreflight(tsx, env) {
	return spawnSync(tsx, ['scripts/preflight.ts', '--production'], { stdio: 'inherit', cwd: root, env }).status;
}

main().catch((error) => {
	console.error(`[ebbline] ${error.message}`);
	shutdown(1);
});
