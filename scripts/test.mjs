// `npm test`: the same set-up as `npm start` against throwaway databases, then type checks, unit,
// integration (real PostgreSQL) and end-to-end (Debian's Chromium) tests. Leaves nothing running.
// Each run writes its console output, the test reports, the app server's log and Playwright's traces
// to test-results/<run id>/; a run that passes removes that folder, a failed one keeps it and says where.
import { spawn } from 'node:child_process';
import { randomBytes } from 'node:crypto';
import { appendFileSync, closeSync, existsSync, mkdirSync, openSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import path from 'node:path';
import { bin, createStack } from './lib/stack.mjs';
import { aptInstall, dataDir, ensureDependencies, log, root } from './lib/system.mjs';

const runId = `ebbline_test_${Date.now()}_${process.pid}`;
// While developing: `npm test -- --only=integration tests/integration/server/flags/flags.test.ts` runs one step
// (lint, svelte-check, unit, integration or e2e) with file filters; CI runs everything.
const args = process.argv.slice(2);
const only =
	args
		.find((a) => a.startsWith('--only='))
		?.slice('--only='.length)
		.split(',') ?? null;
const filters = args.filter((a) => !a.startsWith('--'));
const wanted = (step) => only === null || only.includes(step);
const reportDir = path.join(root, 'test-results');
// everything this run leaves for a post-mortem; removed when the run passes
const runDir = path.join(reportDir, runId);
const runLog = path.join(runDir, 'run.log');
const shown = (p) => path.relative(process.cwd(), p) || p;
const startedAt = new Date();
const openFiles = [];
const failures = [];

/** A line on the console and in run.log. */
function note(message) {
	log(message);
	if (existsSync(runDir)) appendFileSync(runLog, `[ebbline] ${message}\n`);
}

/**
 * Runs a command to completion like system.mjs's run(), with its output on the console and appended
 * to run.log; rejects naming the command when it fails.
 */
function runLogged(command, args, options = {}) {
	return new Promise((resolve, reject) => {
		const child = spawn(command, args, { cwd: root, ...options, stdio: ['ignore', 'pipe', 'pipe'] });
		const tee = (target) => (chunk) => {
			target.write(chunk);
			appendFileSync(runLog, chunk);
		};
		child.stdout.on('data', tee(process.stdout));
		child.stderr.on('data', tee(process.stderr));
		child.on('error', reject);
		child.on('close', (code, signal) => {
			if (code === 0) resolve();
			else reject(new Error(`${command} ${args.join(' ')} exited with ${code ?? signal}`));
		});
	});
}

// every process and database this run starts, stopped and dropped together at the end
const stack = createStack({ run: runLogged });

/** Names of the failed tests in a vitest or Playwright JSON report (empty when it has none or is missing). */
function failedTests(file) {
	if (!existsSync(file)) return [];
	const report = JSON.parse(readFileSync(file, 'utf8'));
	const names = [];
	for (const result of report.testResults ?? []) {
		const failed = (result.assertionResults ?? []).filter((a) => a.status === 'failed');
		for (const a of failed) names.push(`${path.relative(root, result.name)} › ${a.fullName}`);
		if (failed.length === 0 && result.status === 'failed')
			names.push(`${path.relative(root, result.name)} (did not run: ${String(result.message ?? '').split('\n')[0]})`);
	}
	const walk = (suite, trail) => {
		for (const spec of suite.specs ?? []) {
			if (!spec.ok) names.push(`${spec.file} › ${[...trail, spec.title].join(' › ')}`);
		}
		for (const child of suite.suites ?? []) walk(child, [...trail, child.title]);
	};
	for (const suite of report.suites ?? []) walk(suite, []);
	return names;
}

/** Playwright's traces of failed tests, kept under the run's e2e folder. */
function traces(dir) {
	if (!existsSync(dir)) return [];
	return readdirSync(dir, { recursive: true })
		.map(String)
		.filter((f) => f.endsWith('trace.zip'))
		.map((f) => path.join(dir, f));
}

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
	await stack.stop();
	for (const fd of openFiles.splice(0)) closeSync(fd);
}

async function main() {
	const totals = { passed: 0, failed: 0 };
	const add = (c) => {
		totals.passed += c.passed;
		totals.failed += c.failed;
	};
	ensureDependencies();
	const chromium = ensureChromium();
	mkdirSync(runDir, { recursive: true });

	// the app role's login, as the app runs in production; the owner's migrates (scripts/lib/db-roles.mjs)
	const databaseUrl = await stack.database(runId, { anyFreePort: true, throwaway: true });
	const env = {
		...process.env,
		DATABASE_URL: databaseUrl,
		DATABASE_OWNER_URL: stack.ownerUrl(runId),
		EBBLINE_TEST_ADMIN_URL: stack.adminUrl,
		EBBLINE_TEST_TEMPLATE_DB: runId,
		EBBLINE_SIMULATOR: 'off',
		// a throwaway key for second-factor secrets, the same for the tests and the app they sign in to
		EBBLINE_TOTP_KEY: process.env.EBBLINE_TOTP_KEY ?? randomBytes(32).toString('base64')
	};
	await stack.migrate(env);

	const steps = [];
	const step = (name, fn) => steps.push([name, fn]);
	let failedStep = null;
	// One build per run: the fault tests start the built app (integration step), the end-to-end step
	// serves the same build.
	let buildDir = null;
	const ensureBuild = async () => {
		if (buildDir) return buildDir;
		buildDir = await stack.build(env, path.join(dataDir, `build-${runId}`));
		return buildDir;
	};

	if (wanted('lint'))
		step('lint', async () => {
			await runLogged(bin('svelte-kit'), ['sync'], { env });
			await runLogged(bin('eslint'), ['--max-warnings=0', '.'], { env });
			await runLogged(bin('prettier'), ['--check', '--log-level=warn', '.'], { env });
		});
	if (wanted('svelte-check'))
		step('svelte-check', async () => {
			await runLogged(bin('svelte-kit'), ['sync'], { env });
			await runLogged(bin('svelte-check'), ['--tsconfig', './tsconfig.json', '--threshold', 'error', '--output', 'human'], { env });
		});
	for (const project of ['unit', 'integration'].filter(wanted)) {
		step(`vitest ${project}`, async () => {
			const out = path.join(runDir, `vitest-${project}.json`);
			// files a test keeps for a post-mortem (the fault test's app log) go with this run's logs
			const projectEnv = { ...env, EBBLINE_TEST_RUN_DIR: runDir };
			if (project === 'integration' && (filters.length === 0 || filters.some((f) => f.includes('faults')))) {
				try {
					projectEnv.EBBLINE_APP_BUILD_DIR = await ensureBuild();
				} catch (error) {
					// the fault tests then fail, naming the missing build; the other tests still run
					note(`build failed: ${error.message}`);
				}
			}
			try {
				await runLogged(bin('vitest'), ['run', '--project', project, '--reporter=default', '--reporter=json', `--outputFile=${out}`, ...filters], {
					env: projectEnv
				});
			} finally {
				add(countVitest(out));
				failures.push(...failedTests(out));
			}
		});
	}
	if (wanted('e2e'))
		step('end-to-end', async () => {
			await ensureBuild();
			const e2eEnv = { ...env, DATABASE_URL: await stack.copyDatabase(runId, `${runId}_e2e`), DATABASE_OWNER_URL: stack.ownerUrl(`${runId}_e2e`) };
			await stack.seed(e2eEnv);
			// kept with the run's logs: the e-mails the failing tests sent or waited for
			const mailbox = path.join(runDir, 'mailbox');
			const serverLog = (name) => {
				const fd = openSync(path.join(runDir, `${name}.log`), 'a');
				openFiles.push(fd);
				return ['ignore', fd, fd];
			};
			const smtpUrl = await stack.mail(e2eEnv, { mailbox, stdio: serverLog('mail') });
			const { baseUrl } = await stack.app(
				// EBBLINE_ADMIN_TOTP=optional: the other specs sign in as the demo administrator with a password;
				// tests/e2e/second-factor.spec.ts enrols a user of its own, and the requirement itself is
				// tested without a browser (tests/unit/server/auth/enrolment-gate.test.ts, the integration tests)
				{ ...e2eEnv, SMTP_URL: smtpUrl, EBBLINE_MAILBOX_DIR: mailbox, EBBLINE_DEV_MAILBOX: 'on', EBBLINE_ADMIN_TOTP: 'optional' },
				{ buildDir, stdio: serverLog('app') }
			);
			const out = path.join(runDir, 'playwright.json');
			try {
				await runLogged(bin('playwright'), ['test', ...filters], {
					env: {
						...e2eEnv,
						EBBLINE_BASE_URL: baseUrl,
						CHROMIUM_PATH: chromium,
						EBBLINE_MAILBOX_DIR: mailbox,
						PLAYWRIGHT_JSON_OUTPUT_NAME: out,
						EBBLINE_E2E_OUTPUT_DIR: path.join(runDir, 'e2e')
					}
				});
			} finally {
				add(countPlaywright(out));
				failures.push(...failedTests(out));
			}
		});

	for (const [name, fn] of steps) {
		note(`— ${name}`);
		try {
			await fn();
		} catch (error) {
			failedStep ??= name;
			note(`${name} failed: ${error.message}`);
			note(`this run's logs are kept in ${shown(runDir)}`);
			if (name === 'svelte-check') totals.failed += 1;
		}
	}
	return { totals, failedStep };
}

/** What a failed run leaves and how to open it; a run that passed leaves nothing behind. */
function reportRun(exitCode, summary) {
	const seconds = Math.round((Date.now() - startedAt.getTime()) / 1000);
	if (existsSync(reportDir))
		appendFileSync(
			path.join(reportDir, 'runs.log'),
			`${startedAt.toISOString()} ${runId} ${seconds}s ${summary}${exitCode === 0 ? '' : ` → ${shown(runDir)}`}\n`
		);
	if (exitCode === 0) {
		rmSync(runDir, { recursive: true, force: true });
		return;
	}
	if (!existsSync(runDir)) return;
	const lines = [`logs of this failed run: ${shown(runDir)}`, `  ${'run.log'.padEnd(24)}everything printed, step by step`];
	for (const f of ['vitest-unit.json', 'vitest-integration.json', 'playwright.json'])
		if (existsSync(path.join(runDir, f))) lines.push(`  ${f.padEnd(24)}test report`);
	if (existsSync(path.join(runDir, 'app.log'))) lines.push(`  ${'app.log'.padEnd(24)}the app server of the end-to-end tests (its JSON log lines)`);
	for (const f of readdirSync(runDir).filter((f) => f.startsWith('fault-'))) lines.push(`  ${f.padEnd(24)}the app server of a fault test (its JSON log lines)`);
	if (existsSync(path.join(runDir, 'mail.log'))) lines.push(`  ${'mail.log'.padEnd(24)}the local fake SMTP server`);
	if (existsSync(path.join(runDir, 'mailbox'))) lines.push(`  ${'mailbox/'.padEnd(24)}e-mails the end-to-end tests sent`);
	for (const trace of traces(path.join(runDir, 'e2e')).slice(0, 10)) lines.push(`  npx playwright show-trace ${shown(trace)}`);
	if (failures.length > 0) lines.push('failed tests:', ...failures.slice(0, 30).map((f) => `  ${f}`));
	for (const line of lines) note(line);
	const appLog = path.join(runDir, 'app.log');
	if (existsSync(appLog)) {
		const tail = readFileSync(appLog, 'utf8').trimEnd().split('\n').slice(-15);
		if (tail.length && tail[0]) note(`last lines of app.log:\n${tail.join('\n')}`);
	}
}

let exitCode = 1;
let summary = 'did not finish';
try {
	const { totals, failedStep } = await main();
	if (failedStep) note(`first failing step: ${failedStep}`);
	summary = `${totals.passed} passed, ${totals.failed} failed${failedStep ? ` (first failing step: ${failedStep})` : ''}`;
	console.log(`\nebbline: ${totals.passed} passed, ${totals.failed} failed`);
	exitCode = failedStep || totals.failed > 0 ? 1 : 0;
} catch (error) {
	console.error(`[ebbline] ${error.stack ?? error.message}`);
	if (existsSync(runDir)) appendFileSync(runLog, `${error.stack ?? error.message}\n`);
} finally {
	await cleanup();
}
reportRun(exitCode, summary);
process.exit(exitCode);
