// `npm start`: dependencies, private PostgreSQL, migrations, demo data, local mailbox, build, serve
// (each step a call on the stack in scripts/lib/stack.mjs, shared with `npm test`, bench and load).
// Ctrl-C or SIGTERM stops everything this command started, and nothing else.
import { spawnSync } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import { existsSync, mkdirSync, readFileSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { bin, createStack } from './lib/stack.mjs';
import { buildIsStale, dataDir, ensureDependencies, log, root } from './lib/system.mjs';

const appPort = Number(process.env.EBBLINE_PORT ?? 3000);
const smtpPort = Number(process.env.FAKE_SMTP_PORT ?? 2525);
const origin = process.env.ORIGIN ?? `http://127.0.0.1:${appPort}`;
const stack = createStack();
let stopping = false;

async function shutdown(code = 0) {
	if (stopping) return;
	stopping = true;
	log('stopping');
	await stack.stop();
	process.exit(code);
}
process.on('SIGINT', () => shutdown(0));
process.on('SIGTERM', () => shutdown(0));

/** The key second-factor secrets are encrypted with: made once into .data/totp.key (readable by this user only). */
function totpKey() {
	const file = path.join(dataDir, 'totp.key');
	if (!existsSync(file)) {
		mkdirSync(dataDir, { recursive: true });
		writeFileSync(file, `${randomBytes(32).toString('base64')}\n`, { mode: 0o600 });
	}
	return readFileSync(file, 'utf8').trim();
}

async function main() {
	ensureDependencies();
	const env = { ...process.env };
	env.EBBLINE_TOTP_KEY ??= totpKey();
	// the demo's administrators sign in with a password only; npm run serve refuses this flag
	env.EBBLINE_ADMIN_TOTP ??= 'optional';
	if (!env.DATABASE_URL) {
		// the app and its workers connect as ebbline_app; migrations and seed --reset as ebbline_owner
		env.DATABASE_URL = await stack.database('ebbline');
		env.DATABASE_OWNER_URL = stack.ownerUrl('ebbline');
	} else {
		log('using the PostgreSQL server in DATABASE_URL (the demo goes there only if it is a demo database or EBBLINE_DEMO=1)');
	}
	// the demo never migrates or seeds a database it was not made for: a DATABASE_URL may be a hospital's
	if (process.env.DATABASE_URL) {
		const check = spawnSync(bin('tsx'), ['scripts/preflight.ts', '--demo'], { stdio: 'inherit', cwd: root, env }).status;
		if (check !== 0) return shutdown(check === 3 ? 3 : 1);
	}
	await stack.migrate(env);
	// `npm start -- --reseed` rebuilds the private demo database from scratch (never one in DATABASE_URL)
	const reseed = process.argv.includes('--reseed');
	if (reseed && process.env.DATABASE_URL) {
		log('--reseed rebuilds only the private demo database: unset DATABASE_URL, or run npm run seed -- --reset against your own');
		return shutdown(2);
	}
	await stack.seed(env, reseed ? ['--reset'] : []);

	if (!env.SMTP_URL) {
		env.EBBLINE_MAILBOX_DIR ??= path.join(dataDir, 'mailbox');
		env.EBBLINE_DEV_MAILBOX ??= 'on'; // shows /dev/mail; npm run serve refuses it
		env.SMTP_URL = await stack.mail(env, { port: smtpPort, mailbox: env.EBBLINE_MAILBOX_DIR, quiet: false });
	}

	const outDir = path.join(root, 'build');
	if (buildIsStale(outDir)) await stack.build(env, outDir, { keep: true });

	const { child: app } = await stack.app(
		{ ...env, BODY_SIZE_LIMIT: env.BODY_SIZE_LIMIT ?? '2M', EBBLINE_SIMULATOR: env.EBBLINE_SIMULATOR ?? 'on' },
		{ buildDir: outDir, port: appPort, origin, quiet: false }
	);
	app.on('exit', (code) => {
		if (!stopping) {
			log(`the app exited (${code}); stopping the rest`);
			shutdown(code ?? 1);
		}
	});
	log(`Ebbline is running at ${origin}`);
	log('Demo sign-ins (password for all: larkspur-demo-2026):');
	log('  pharmacist  pharmacist@larkspur.test');
	log('  physician   physician@larkspur.test');
	log('  admin       admin@larkspur.test');
	if (env.EBBLINE_MAILBOX_DIR && env.EBBLINE_DEV_MAILBOX === 'on') log(`Outgoing e-mail is kept in the local mailbox: ${origin}/dev/mail`);
	log('Press Ctrl-C to stop.');
}

main().catch((error) => {
	console.error(`[ebbline] ${error.message}`);
	shutdown(1);
});
