// The one orchestrator behind `npm start`, `npm test`, `npm run bench` and `npm run load`: each of them
// is a few calls on a Stack, which starts (or reuses) the project's private PostgreSQL, makes databases,
// migrates and seeds them, builds the app, starts the local fake SMTP server and the built app, and on
// stop() undoes exactly what it started: its children, its folders, its databases, and the cluster when
// this stack started it and nobody else uses it.
import { rmSync } from 'node:fs';
import path from 'node:path';
import { spawnSync } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import { dataDir, ensureDependencies, freePort, log, root, run, startChild, stopChild, waitForPort } from './system.mjs';

export const bin = (name) => path.join(root, 'node_modules/.bin', name);

/**
 * A stack of processes and databases that stops as one.
 * - `run(command, args, options)`: how the stack runs a one-off command (default: system.mjs's run,
 *   output on the console); `npm test` passes one that also writes its run log.
 */
export function createStack({ run: runStep = async (command, args, options) => run(command, args, options) } = {}) {
	const children = [];
	const paths = [];
	const databases = [];
	let postgres = null;
	let adminUrl = null;
	let stopped = false;

	// the owner and app roles (scripts/lib/db-roles.mjs) on this stack's cluster; bench stacks go without
	let roles = null;

	const stack = {
		/** The superuser's connection URL for a database name (after database()). */
		url: (name) => postgres.url(name),
		/** The app role's connection URL (DATABASE_URL), or the superuser's on a stack without roles. */
		appUrl: (name) => (roles ? postgres.roleUrl(roles.app, name) : postgres.url(name)),
		/** The owner role's connection URL (DATABASE_OWNER_URL: migrations, seed --reset, restore). */
		ownerUrl: (name) => (roles ? postgres.roleUrl(roles.owner, name) : postgres.url(name)),
		get adminUrl() {
			return adminUrl;
		},
		/**
		 * Starts (or reuses) the private cluster and creates the database when missing, owned by the owner
		 * role, and returns the app role's URL for it. `throwaway: true` drops it (and every database whose
		 * name starts with it) on stop(); `anyFreePort: true` lets a second checkout's cluster run beside
		 * this one; `roles: false` keeps to the superuser (the benches, whose fixtures change tables).
		 */
		async database(name, { anyFreePort = false, throwaway = false, roles: withRoles = true } = {}) {
			ensureDependencies();
			const { ensurePostgres, ROLES } = await import('./postgres.mjs');
			const { adoptClusterDatabase, createDatabaseIfMissing, ensureClusterRoles } = await import('./database.mjs');
			postgres ??= ensurePostgres({ anyFreePort });
			adminUrl = postgres.url('postgres');
			if (withRoles) {
				roles = ROLES;
				await ensureClusterRoles(postgres);
			}
			await createDatabaseIfMissing(adminUrl, name, { owner: roles?.owner });
			// a database made before the roles (an earlier npm start's) is handed to them
			if (roles) await adoptClusterDatabase(postgres, name);
			if (throwaway) databases.push(name);
			return stack.appUrl(name);
		},
		/** A new database copied from another (the copy is dropped on stop when its template is); returns its app URL. */
		async copyDatabase(template, name) {
			const { withAdmin } = await import('./database.mjs');
			await withAdmin(adminUrl, (sql) => sql.unsafe(`create database "${name}" template "${template}"${roles ? ` owner "${roles.owner}"` : ''}`));
			return stack.appUrl(name);
		},
		migrate: (env, options = {}) => runStep(bin('tsx'), ['scripts/migrate.ts'], { env, ...options }),
		seed: (env, args = [], options = {}) => runStep(bin('tsx'), ['scripts/seed.ts', ...args], { env, ...options }),
		/** Builds the app into `dir` (a folder of its own, removed on stop, unless `keep`). */
		async build(env, dir, { keep = false } = {}) {
			if (!keep) paths.push(dir);
			log('building the app');
			const started = Date.now();
			await runStep(bin('vite'), ['build', '--logLevel', 'warn'], { env: { ...env, EBBLINE_BUILD_DIR: dir } });
			log(`built in ${((Date.now() - started) / 1000).toFixed(0)} s`);
			return dir;
		},
		/** A folder removed on stop. */
		scratch(name) {
			const dir = path.join(dataDir, name);
			paths.push(dir);
			return dir;
		},
		/** Starts the local fake SMTP server writing to `mailbox`; returns its smtp:// URL. */
		async mail(env, { port, mailbox, quiet = true, stdio } = {}) {
			const smtpPort = port ?? (await freePort());
			children.push(
				startChild('mail', bin('tsx'), ['scripts/fake-smtp.ts'], {
					env: { ...env, FAKE_SMTP_PORT: String(smtpPort), EBBLINE_MAILBOX_DIR: mailbox },
					quiet,
					...(stdio ? { stdio } : {})
				})
			);
			await waitForPort(smtpPort);
			return `smtp://127.0.0.1:${smtpPort}`;
		},
		/** Starts the built app (adapter-node) and waits until it listens; returns its URL and process. */
		async app(env, { buildDir, port, quiet = true, stdio, nodeArgs = [], origin } = {}) {
			const appPort = port ?? (await freePort());
			const baseUrl = `http://127.0.0.1:${appPort}`;
			// the app never holds the owner's password (DATABASE_OWNER_URL is for migrations and seed --reset)
			const appEnv = { ...env, HOST: '127.0.0.1', PORT: String(appPort), ORIGIN: origin ?? baseUrl };
			delete appEnv.DATABASE_OWNER_URL;
			const child = startChild('app', process.execPath, [...nodeArgs, path.join(buildDir, 'index.js')], {
				env: appEnv,
				quiet,
				...(stdio ? { stdio } : {})
			});
			children.push(child);
			await waitForPort(appPort, '127.0.0.1', 60_000);
			return { baseUrl: origin ?? baseUrl, child, stop: () => stopChild(child) };
		},
		/** Any other long-running child that should stop with the stack. */
		child(name, command, args, options) {
			const child = startChild(name, command, args, options);
			children.push(child);
			return child;
		},
		/** Stops children, removes folders and throwaway databases, and the cluster if it is ours and idle. */
		async stop({ keepDatabases = false } = {}) {
			if (stopped) return;
			stopped = true;
			for (const child of children.reverse()) await stopChild(child);
			for (const p of paths) rmSync(p, { recursive: true, force: true });
			if (!postgres) return;
			const { dropDatabase, withAdmin } = await import('./database.mjs');
			if (keepDatabases) {
				for (const name of databases) log(`kept database ${name} at ${postgres.url(name)}`);
				return;
			}
			for (const name of databases) {
				const copies = await withAdmin(adminUrl, (sql) => sql`select datname from pg_database where datname like ${name + '%'}`).catch(() => []);
				for (const { datname } of copies) await dropDatabase(adminUrl, datname).catch((error) => log(`could not drop ${datname}: ${error.message}`));
			}
			if (!postgres.startedHere) return;
			// another `npm start`, `npm test` or bench may be using the same cluster: stop it only when idle
			const busy = await withAdmin(
				adminUrl,
				(sql) => sql`select count(*)::int as n from pg_stat_activity where datname is not null and datname <> 'postgres' and pid <> pg_backend_pid()`
			)
				.then((rows) => rows[0].n > 0)
				.catch(() => false);
			const otherRuns = await withAdmin(adminUrl, (sql) => sql`select count(*)::int as n from pg_database where datname like 'ebbline\\_%\\_%'`)
				.then((rows) => rows[0].n > 0)
				.catch(() => false);
			if (!busy && !otherRuns) postgres.stop();
		},
		get startedPostgres() {
			return postgres?.startedHere ?? false;
		}
	};
	return stack;
}

/**
 * The stack of `npm run bench` and `npm run load`: a fresh database on the private cluster (dropped at
 * the end), migrations, a fixture step, the app built into a folder of its own, the local fake SMTP
 * server and the built app with its embedded workers, all on free ports. Never touches a running
 * `npm start`: other database, other ports, other build folder.
 */
export async function startBenchStack(label) {
	const base = createStack();
	const runId = `ebbline_${label}_${Date.now()}`;
	const databaseUrl = await base.database(runId, { anyFreePort: true, throwaway: true, roles: false });
	// the benches and the load test sign in as the demo's users with a password: no second factor asked of the administrator
	const env = {
		...process.env,
		DATABASE_URL: databaseUrl,
		EBBLINE_SIMULATOR: 'off',
		EBBLINE_WORKERS: 'embedded',
		EBBLINE_ADMIN_TOTP: 'optional',
		EBBLINE_TOTP_KEY: process.env.EBBLINE_TOTP_KEY ?? randomBytes(32).toString('base64')
	};
	delete env.EBBLINE_PORT;
	let appEnv = null;
	let appBuildDir = null;

	const stack = {
		runId,
		env,
		get adminUrl() {
			return base.adminUrl;
		},
		databaseUrl,
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
			appBuildDir = process.env.EBBLINE_BENCH_BUILD_DIR ?? (await base.build(env, path.join(dataDir, `build-${runId}`)));
			const mailbox = base.scratch(`mailbox-${runId}`);
			const smtpUrl = await base.mail(env, { mailbox });
			appEnv = { ...env, SMTP_URL: smtpUrl, EBBLINE_MAILBOX_DIR: mailbox, EBBLINE_DEV_MAILBOX: 'on', BODY_SIZE_LIMIT: '2M', SHUTDOWN_TIMEOUT: '2' };
			// EBBLINE_BENCH_SPLIT_WORKERS=1: the web process without workers, and `npm run worker` beside it
			// EBBLINE_BENCH_NO_WORKERS=1: no workers at all (the feed stage then times the intake alone)
			if (process.env.EBBLINE_BENCH_NO_WORKERS) appEnv.EBBLINE_WORKERS = 'off';
			else if (process.env.EBBLINE_BENCH_SPLIT_WORKERS) {
				appEnv.EBBLINE_WORKERS = 'off';
				base.child('worker', bin('tsx'), ['jobs/worker.ts'], { env: { ...appEnv, EBBLINE_WORKERS: 'embedded' }, quiet: true });
			}
			const app = await stack.startAnotherApp();
			stack.app = app.child;
			stack.baseUrl = app.baseUrl;
			return stack.baseUrl;
		},
		/** One more app process on the same database (after startApp), e.g. with other settings. */
		async startAnotherApp(extraEnv = {}) {
			// EBBLINE_BENCH_PROFILE_DIR: write the app's V8 CPU profile there when it stops
			const dir = process.env.EBBLINE_BENCH_PROFILE_DIR;
			const nodeArgs = dir ? ['--cpu-prof', `--cpu-prof-dir=${dir}`] : [];
			return base.app({ ...appEnv, ...extraEnv }, { buildDir: appBuildDir, nodeArgs });
		},
		// EBBLINE_BENCH_KEEP_DB=1 leaves the database (and the cluster) for a look with psql afterwards
		stop: () => base.stop({ keepDatabases: Boolean(process.env.EBBLINE_BENCH_KEEP_DB) })
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

/** Runs `fn(stack)` on a bench stack and always cleans up, also on Ctrl-C. */
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
		stack = await startBenchStack(label);
		return await fn(stack);
	} finally {
		await stack?.stop();
	}
}
