// The self-contained stack of `npm run bench` and `npm run load`: the private PostgreSQL of `npm start`
// (started only when it is not running, and then stopped again only when nobody else uses it), a fresh
// database that is dropped at the end, migrations, a fixture step, the app built into a folder of its
// own, the local fake SMTP server and the built app with its embedded workers, all on free ports.
// Never touches a running `npm start`: other database, other ports, other build folder.
import { spawnSync } from 'node:child_process';
import { rmSync } from 'node:fs';
import path from 'node:path';
import { dataDir, ensureDependencies, freePort, log, root, run, startChild, stopChild, waitForPort } from './system.mjs';

export const bin = (name) => path.join(root, 'node_modules/.bin', name);

/**
 * Starts everything up to (not including) the app; `startApp()` then builds and starts it. `stop()`
 * undoes all of it and is safe to call twice.
 */
export async function startStack(label) {
	ensureDependencies();
	const { ensurePostgres } = await import('./postgres.mjs');
	const { createDatabaseIfMissing, dropDatabase, withAdmin } = await import('./database.mjs');
	const runId = `ebbline_${label}_${Date.now()}`;
	const postgres = ensurePostgres({ anyFreePort: true });
	const adminUrl = postgres.url('postgres');
	await createDatabaseIfMissing(adminUrl, runId);
	const children = [];
	const paths = [];
	let stopped = false;
	let appEnv = null;
	let appBuildDir = null;
	const env = { ...process.env, DATABASE_URL: postgres.url(runId), EBBLINE_SIMULATOR: 'off', EBBLINE_WORKERS: 'embedded' };
	delete env.EBBLINE_PORT;

	const stack = {
		runId,
		env,
		adminUrl,
		databaseUrl: env.DATABASE_URL,
		baseUrl: null,
		app: null,
		migrate() {
			run(bin('tsx'), ['scripts/migrate.ts'], { env, stdio: ['ignore', 'ignore', 'inherit'] });
		},
		/** Runs scripts/bench/fixture.ts and returns the object it prints on its FIXTURE line. */
		fixture(...args) {
			const result = spawnSync(bin('tsx'), ['scripts/bench/fixture.ts', ...args.map(String)], {
				cwd: root,
				env,
				encoding: 'utf8',
				maxBuffer: 64 * 1024 * 1024
			});
			const line = (result.stdout ?? '').split('\n').find((l) => l.startsWith('FIXTURE '));
			if (result.status !== 0 || !line) {
				process.stderr.write(result.stderr ?? '');
				throw new Error(`fixture ${args[0]} failed (exit ${result.status ?? result.signal})`);
			}
			return JSON.parse(line.slice('FIXTURE '.length));
		},
		async startApp() {
			// EBBLINE_BENCH_BUILD_DIR: an existing build to start instead (while working on the bench itself)
			let buildDir = process.env.EBBLINE_BENCH_BUILD_DIR;
			if (!buildDir) {
				buildDir = path.join(dataDir, `build-${runId}`);
				paths.push(buildDir);
				log('building the app');
				const started = Date.now();
				run(bin('vite'), ['build', '--logLevel', 'warn'], { env: { ...env, EBBLINE_BUILD_DIR: buildDir } });
				log(`built in ${((Date.now() - started) / 1000).toFixed(0)} s`);
			}
			const mailbox = path.join(dataDir, `mailbox-${runId}`);
			paths.push(mailbox);
			const smtpPort = await freePort();
			children.push(
				startChild('mail', bin('tsx'), ['scripts/fake-smtp.ts'], {
					env: { ...env, FAKE_SMTP_PORT: String(smtpPort), EBBLINE_MAILBOX_DIR: mailbox },
					quiet: true
				})
			);
			await waitForPort(smtpPort);
			appEnv = { ...env, SMTP_URL: `smtp://127.0.0.1:${smtpPort}`, EBBLINE_MAILBOX_DIR: mailbox, BODY_SIZE_LIMIT: '2M', SHUTDOWN_TIMEOUT: '2' };
			appBuildDir = buildDir;
			// EBBLINE_BENCH_SPLIT_WORKERS=1: the web process without workers, and `npm run worker` beside it
			// EBBLINE_BENCH_NO_WORKERS=1: no workers at all (the feed stage then times the intake alone)
			if (process.env.EBBLINE_BENCH_NO_WORKERS) appEnv.EBBLINE_WORKERS = 'off';
			else if (process.env.EBBLINE_BENCH_SPLIT_WORKERS) {
				appEnv.EBBLINE_WORKERS = 'off';
				children.push(startChild('worker', bin('tsx'), ['jobs/worker.ts'], { env: { ...appEnv, EBBLINE_WORKERS: 'embedded' }, quiet: true }));
			}
			const app = await stack.startAnotherApp();
			stack.app = app.child;
			stack.baseUrl = app.baseUrl;
			return stack.baseUrl;
		},
		/** One more app process on the same database (after startApp), e.g. with other settings. */
		async startAnotherApp(extraEnv = {}) {
			const appPort = await freePort();
			const baseUrl = `http://127.0.0.1:${appPort}`;
			// EBBLINE_BENCH_PROFILE_DIR: write the app's V8 CPU profile there when it stops
			const profile = process.env.EBBLINE_BENCH_PROFILE_DIR ? ['--cpu-prof', `--cpu-prof-dir=${process.env.EBBLINE_BENCH_PROFILE_DIR}`] : [];
			const child = startChild('app', process.execPath, [...profile, path.join(appBuildDir, 'index.js')], {
				env: { ...appEnv, HOST: '127.0.0.1', PORT: String(appPort), ORIGIN: baseUrl, ...extraEnv },
				quiet: true
			});
			children.push(child);
			await waitForPort(appPort, '127.0.0.1', 60_000);
			return { baseUrl, child, stop: () => stopChild(child) };
		},
		async stop() {
			if (stopped) return;
			stopped = true;
			for (const child of children.reverse()) await stopChild(child);
			for (const p of paths) rmSync(p, { recursive: true, force: true });
			// EBBLINE_BENCH_KEEP_DB=1 leaves the database (and the cluster) for a look with psql afterwards
			if (process.env.EBBLINE_BENCH_KEEP_DB) {
				log(`kept database ${runId} at ${env.DATABASE_URL}`);
				return;
			}
			await dropDatabase(adminUrl, runId).catch((error) => log(`could not drop ${runId}: ${error.message}`));
			if (postgres.startedHere) {
				// someone may have started `npm start` or `npm test` on the same cluster meanwhile
				const busy = await withAdmin(
					adminUrl,
					(sql) => sql`select count(*)::int as n from pg_stat_activity where datname is not null and datname <> 'postgres' and pid <> pg_backend_pid()`
				)
					.then((rows) => rows[0].n > 0)
					.catch(() => false);
				if (!busy) postgres.stop();
			}
		}
	};
	return stack;
}

/** Signs in through the real sign-in form and returns the session cookie (name=value). */
export async function signIn(baseUrl, email, password) {
	const response = await fetch(`${baseUrl}/sign-in`, {
		method: 'POST',
		redirect: 'manual',
		headers: { 'content-type': 'application/x-www-form-urlencoded', origin: baseUrl, accept: 'text/html' },
		body: new URLSearchParams({ email, password, next: '/board' })
	});
	const cookie = response.headers
		.getSetCookie()
		.map((c) => c.split(';')[0])
		.find((c) => c.startsWith('ebbline_session='));
	if (response.status !== 303 || !cookie) throw new Error(`sign-in of ${email} failed: HTTP ${response.status}`);
	return cookie;
}

/** Runs `fn(stack)` and always cleans up, also on Ctrl-C. */
export async function withStack(label, fn) {
	let stack = null;
	const onSignal = async () => {
		log('interrupted; cleaning up');
		await stack?.stop();
		process.exit(130);
	};
	process.on('SIGINT', onSignal);
	process.on('SIGTERM', onSignal);
	try {
		stack = await startStack(label);
		return await fn(stack);
	} finally {
		await stack?.stop();
	}
}
