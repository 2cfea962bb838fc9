// `npm test`: the same set-up as `npm start` against throwaway databases, then type checks, unit,
// integration (real PostgreSQL) and end-to-end (Debian's Chromium) tests. Leaves nothing running.
import { existsSync, mkdirSync, readFileSync, rmSync } from 'node:fs';
import path from 'node:path';
import { aptInstall, dataDir, ensureDependencies, freePort, log, root, run, startChild, stopChild, waitForPort } from './lib/system.mjs';

const runId = `ebbline_test_${Date.now()}_${process.pid}`;
// While developing: `npm test -- --only=integration tests/integration/flags.test.ts` runs one step
// (svelte-check, unit, integration or e2e) with file filters; CI runs everything.
const args = process.argv.slice(2);
const only = args.find((a) => a.startsWith('--only='))?.slice('--only='.length).split(',') ?? null;
const filters = args.filter((a) => !a.startsWith('--'));
const wanted = (step) => only === null || only.includes(step);
const reportDir = path.join(root, 'test-results');
const children = [];
let postgres = null;
const databases = [];
const cleanupPaths = [];

function ensureChromium() {
	const chromium = process.env.CHROMIUM_PATH ?? '/usr/bin/chromium';
	if (!existsSync(chromium)) aptInstall('chromium');
	return chromium;
}

function countVitest(file) {
	if (!existsSync(file)) return { passed: 0, failed: 1 };
	const report = JSON.parse(readFileSync(file, 'utf8'));
	// A file that fails to load has no failed tests but a failed suite; count it once, not twice.
	const failed = report.numFailedTests > 0 ? report.numFailedTests : (report.numFailedTestSuites ?? 0);
	return { passed: report.numPassedTests, failed };
}

function countPlaywright(file) {
	if (!existsSync(file)) return { passed: 0, failed: 1 };
	const { stats } = JSON.parse(readFileSync(file, 'utf8'));
	return { passed: stats.expected + stats.flaky, failed: stats.unexpected };
}

async function cleanup() {
	for (const child of children.reverse()) await stopChild(child);
	for (const p of cleanupPaths) rmSync(p, { recursive: true, force: true });
	if (postgres) {
		const { dropDatabase } = await import('./lib/database.mjs');
		const admin = postgres.url('postgres');
		const { withAdmin } = await import('./lib/database.mjs');
		const leftovers = await withAdmin(admin, (sql) => sql`select datname from pg_database where datname like ${runId + '%'}`).catch(() => []);
		for (const { datname } of leftovers) await dropDatabase(admin, datname).catch(() => {});
		// Another `npm test` or `npm start` may be using the same cluster: stop it only when idle.
		const busy = await withAdmin(admin, (sql) => sql`select count(*)::int as n from pg_stat_activity where datname is not null and datname <> 'postgres' and pid <> pg_backend_pid()`)
			.then((rows) => rows[0].n > 0)
			.catch(() => false);
		const otherRuns = await withAdmin(admin, (sql) => sql`select count(*)::int as n from pg_database where datname like 'ebbline_test_%'`)
			.then((rows) => rows[0].n > 0)
			.catch(() => false);
		if (postgres.startedHere && !busy && !otherRuns) postgres.stop();
	}
}

async function main() {
	const totals = { passed: 0, failed: 0 };
	const add = (c) => {
		totals.passed += c.passed;
		totals.failed += c.failed;
	};
	ensureDependencies();
	const chromium = ensureChromium();
	mkdirSync(reportDir, { recursive: true });

	const { ensurePostgres } = await import('./lib/postgres.mjs');
	const { createDatabaseIfMissing } = await import('./lib/database.mjs');
	postgres = ensurePostgres({ anyFreePort: true });
	const admin = postgres.url('postgres');
	await createDatabaseIfMissing(admin, runId);
	databases.push(runId);
	const env = {
		...process.env,
		DATABASE_URL: postgres.url(runId),
		EBBLINE_TEST_ADMIN_URL: admin,
		EBBLINE_TEST_TEMPLATE_DB: runId,
		EBBLINE_SIMULATOR: 'off'
	};
	const bin = (name) => path.join(root, 'node_modules/.bin', name);
	run(bin('tsx'), ['scripts/migrate.ts'], { env });

	const steps = [];
	const step = (name, fn) => steps.push([name, fn]);
	let failedStep = null;
	// One build per run: the fault tests start the built app (integration step), the end-to-end step
	// serves the same build.
	let buildDir = null;
	const ensureBuild = () => {
		if (buildDir) return buildDir;
		const dir = path.join(dataDir, `build-${runId}`);
		cleanupPaths.push(dir);
		log('building the app');
		run(bin('vite'), ['build', '--logLevel', 'warn'], { env: { ...env, EBBLINE_BUILD_DIR: dir } });
		buildDir = dir;
		return buildDir;
	};

	if (wanted('svelte-check')) step('svelte-check', () => {
		run(bin('svelte-kit'), ['sync'], { env });
		run(bin('svelte-check'), ['--tsconfig', './tsconfig.json', '--threshold', 'error', '--output', 'human'], { env });
	});
	for (const project of ['unit', 'integration'].filter(wanted)) {
		step(`vitest ${project}`, () => {
			const out = path.join(reportDir, `${runId}-vitest-${project}.json`);
			const projectEnv = { ...env };
			if (project === 'integration' && (filters.length === 0 || filters.some((f) => f.includes('faults')))) {
				try {
					projectEnv.EBBLINE_APP_BUILD_DIR = ensureBuild();
				} catch (error) {
					// the fault tests then fail, naming the missing build; the other tests still run
					log(`build failed: ${error.message}`);
				}
			}
			try {
				run(bin('vitest'), ['run', '--project', project, '--reporter=default', '--reporter=json', `--outputFile=${out}`, ...filters], { env: projectEnv });
			} finally {
				add(countVitest(out));
			}
		});
	}
	if (wanted('e2e')) step('end-to-end', async () => {
		ensureBuild();
		const e2eDb = `${runId}_e2e`;
		const { withAdmin } = await import('./lib/database.mjs');
		await withAdmin(admin, (sql) => sql.unsafe(`create database "${e2eDb}" template "${runId}"`));
		const e2eEnv = { ...env, DATABASE_URL: postgres.url(e2eDb) };
		run(bin('tsx'), ['scripts/seed.ts'], { env: e2eEnv });
		const smtpPort = await freePort();
		const mailbox = path.join(dataDir, `mailbox-${runId}`);
		children.push(startChild('mail', bin('tsx'), ['scripts/fake-smtp.ts'], { env: { ...e2eEnv, FAKE_SMTP_PORT: String(smtpPort), EBBLINE_MAILBOX_DIR: mailbox }, quiet: true }));
		await waitForPort(smtpPort);
		const appPort = await freePort();
		const baseUrl = `http://127.0.0.1:${appPort}`;
		const app = startChild('app', process.execPath, [path.join(buildDir, 'index.js')], {
			env: { ...e2eEnv, HOST: '127.0.0.1', PORT: String(appPort), ORIGIN: baseUrl, SMTP_URL: `smtp://127.0.0.1:${smtpPort}`, EBBLINE_MAILBOX_DIR: mailbox },
			quiet: true
		});
		children.push(app);
		await waitForPort(appPort, '127.0.0.1', 60_000);
		const out = path.join(reportDir, `${runId}-playwright.json`);
		try {
			run(bin('playwright'), ['test', ...filters], {
				env: { ...e2eEnv, EBBLINE_BASE_URL: baseUrl, CHROMIUM_PATH: chromium, EBBLINE_MAILBOX_DIR: mailbox, PLAYWRIGHT_JSON_OUTPUT_NAME: out }
			});
		} finally {
			add(countPlaywright(out));
			rmSync(mailbox, { recursive: true, force: true });
		}
	});

	for (const [name, fn] of steps) {
		log(`— ${name}`);
		try {
			await fn();
		} catch (error) {
			failedStep ??= name;
			log(`${name} failed: ${error.message}`);
			if (name === 'svelte-check') totals.failed += 1;
		}
	}
	return { totals, failedStep };
}

let exitCode = 1;
try {
	const { totals, failedStep } = await main();
	if (failedStep) log(`first failing step: ${failedStep}`);
	console.log(`\nebbline: ${totals.passed} passed, ${totals.failed} failed`);
	exitCode = failedStep || totals.failed > 0 ? 1 : 0;
} catch (error) {
	console.error(`[ebbline] ${error.stack ?? error.message}`);
} finally {
	await cleanup();
}
process.exit(exitCode);
