// Crash safety: a worker process (npm run worker) re-assesses while 2,000 results arrive; it is killed
// with SIGKILL part-way and started again. Every result is stored exactly once and every order ends
// with an assessment newer than its patient's last result; nothing lands in the dead-letter queue; no
// order has two open flags for one rule, and the open flags are those the rules give on the newest data.
import { spawn, type ChildProcess } from 'node:child_process';
import { fileURLToPath } from 'node:url';
import { sql } from 'drizzle-orm';
import PgBoss from 'pg-boss';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { stopBoss } from '../../../../src/lib/server/queue';
import { DEAD_LETTER_QUEUE } from '../../../../src/lib/server/queue/job';
import { getActiveRuleSet, backTest } from '../../../../src/lib/server/rules';
import { admissionsBundle, resultsBundle, type SyntheticWard } from '../../../fixtures/synthetic-feed';
import { ingestText, root, withAgents } from '../feed/helpers';

const PATIENTS = 200;
const MESSAGES = 20;
const RESULTS_PER_MESSAGE = 100;
const WARD: SyntheticWard = { prefix: 'crash', mrnPrefix: 'CR', family: 'Crashtest', patients: PATIENTS, t0Ms: Date.parse('2026-11-20T06:00:00Z') };
/** Message m: two results (creatinine and albumin) for each of 50 patients; every patient appears in 5 messages. */
const results = (m: number) => resultsBundle(WARD, m, (m % 4) * 50, (m % 4) * 50 + RESULTS_PER_MESSAGE / 2);

const rows = async <T>(query: ReturnType<typeof sql>) => Array.from((await getDb().execute(query)) as unknown as T[]);
const one = async <T>(query: ReturnType<typeof sql>) => (await rows<T>(query))[0];
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

let worker: ChildProcess | null = null;
let output = '';
let maintenance: PgBoss | null = null;

function startWorker() {
	const env: NodeJS.ProcessEnv = { ...process.env, EBBLINE_SIMULATOR: 'off', EBBLINE_WORKERS: 'off' };
	delete env.VITEST;
	// node with tsx's loader (what `npm run worker` runs), so the pid is the worker itself and SIGKILL reaches it
	const child = spawn(process.execPath, ['--import', 'tsx', 'jobs/worker.ts'], { cwd: fileURLToPath(root), env, stdio: ['ignore', 'pipe', 'pipe'] });
	child.stdout?.on('data', (d) => (output += d));
	child.stderr?.on('data', (d) => (output += d));
	return child;
}

async function waitFor(what: string, check: () => Promise<boolean>, timeoutMs: number) {
	const until = Date.now() + timeoutMs;
	while (Date.now() < until) {
		if (await check()) return;
		await sleep(250);
	}
	throw new Error(`timed out waiting for ${what}\n--- worker output ---\n${output.slice(-3000)}`);
}

const pending = () =>
	one<{ n: number }>(sql`select count(*)::int as n from pgboss.job where name = 'order.reassess' and state in ('created', 'retry', 'active')`);

/** Orders whose newest assessment is not newer than the newest result of their patient. */
const behind = () =>
	one<{ n: number }>(sql`
		select count(*)::int as n from orders o
		where o.status = 'active' and coalesce((select max(a.created_at) from assessments a where a.order_id = o.id), '-infinity')
			<= (select max(r.created_at) from lab_results r where r.patient_id = o.patient_id)`);

beforeAll(async () => {
	await withAgents();
});
afterAll(async () => {
	worker?.kill('SIGKILL');
	await maintenance?.stop({ graceful: false, wait: false }).catch(() => {});
	await stopBoss();
});

describe('crash safety of the order.reassess worker', () => {
	it('stores 2,000 results once and re-assesses every affected order after a SIGKILL', { timeout: 240_000 }, async () => {
		const setup = await ingestText(admissionsBundle(WARD));
		expect(setup.counts.quarantined).toBe(0);

		worker = startWorker();
		await waitFor('the worker to assess the admissions', async () => (await one<{ n: number }>(sql`select count(*)::int as n from assessments`)).n > 0, 60_000);

		const messages = Array.from({ length: MESSAGES }, (_, m) => results(m));
		const ingestStarted = performance.now();
		for (let m = 0; m < 10; m++) expect((await ingestText(messages[m])).counts.accepted).toBe(RESULTS_PER_MESSAGE);
		// kill it while there is work in hand
		await waitFor(
			'assessments of the first results',
			async () => (await one<{ n: number }>(sql`select count(*)::int as n from assessments`)).n > PATIENTS,
			60_000
		);
		const atKill = await pending();
		worker.kill('SIGKILL');
		await new Promise((r) => worker?.once('exit', r));
		const active = await one<{ n: number }>(sql`select count(*)::int as n from pgboss.job where name = 'order.reassess' and state = 'active'`);
		console.log(`killed with ${atKill.n} jobs pending (${active.n} active in the dead worker)`);
		// the dead worker's batch stays active: nobody completes it
		await sleep(1500);
		expect((await one<{ n: number }>(sql`select count(*)::int as n from pgboss.job where name = 'order.reassess' and state = 'active'`)).n).toBe(active.n);

		// results keep arriving while no worker runs, and two messages are sent again
		for (let m = 10; m < MESSAGES; m++) expect((await ingestText(messages[m])).counts.accepted).toBe(RESULTS_PER_MESSAGE);
		for (const m of [3, 7]) expect((await ingestText(messages[m])).duplicateMessage).toBe(true);
		const ingestMs = performance.now() - ingestStarted;

		// a restarted worker; maintenance (normally every 2 minutes) every 2 s, so abandoned jobs are retried sooner
		const drainStarted = performance.now();
		worker = startWorker();
		maintenance = new PgBoss({ connectionString: process.env.DATABASE_URL as string, schema: 'pgboss', maintenanceIntervalSeconds: 2, max: 2 });
		maintenance.on('error', () => {});
		await maintenance.start();
		await waitFor('every order to be assessed after its last result', async () => (await behind()).n === 0 && (await pending()).n === 0, 180_000);
		const drainMs = performance.now() - drainStarted;
		console.log(`2,000 results ingested in ${Math.round(ingestMs)} ms (worker down half the time); queue drained ${Math.round(drainMs)} ms after the restart`);

		const stored = await one<{ n: number; distinct: number }>(sql`
			select count(*)::int as n, count(distinct source_id)::int as distinct from lab_results where source_id like 'crash-p-%-cr-%' or source_id like 'crash-p-%-alb-%'`);
		expect(stored).toEqual({ n: MESSAGES * RESULTS_PER_MESSAGE, distinct: MESSAGES * RESULTS_PER_MESSAGE });
		expect((await behind()).n).toBe(0);
		const dead = await one<{ n: number }>(sql`select count(*)::int as n from pgboss.job where name = ${DEAD_LETTER_QUEUE}`);
		expect(dead.n).toBe(0);

		// Flags after the crash: the killed batch's flag changes rolled back with its assessments, so there
		// is at most one open flag per order, each opened once (one 'opened' event), and the open
		// flags are exactly what the active rule set says about every order's newest assessment: a dry run
		// of publishing the same rules would open and supersede nothing.
		const open = await one<{ n: number }>(sql`select count(*)::int as n from flags where state <> 'closed'`);
		expect(open.n).toBeGreaterThan(0);
		const doubled = await rows<{ order_id: string }>(sql`select order_id from flags where state <> 'closed' group by order_id having count(*) > 1`);
		expect(doubled).toEqual([]);
		const openedTwice = await rows<{ flag_id: string }>(
			sql`select f.id as flag_id from flags f left join flag_events e on e.flag_id = f.id and e.kind = 'opened' group by f.id having count(e.id) <> 1`
		);
		expect(openedTwice).toEqual([]);
		const ruleSet = await getActiveRuleSet();
		const check = await backTest({ id: ruleSet.id, version: ruleSet.version, rules: ruleSet.rules }, { days: 1 });
		for (const [key, counts] of Object.entries(check.byRule)) expect({ key, ...counts.now }).toEqual({ key, open: 0, supersede: 0 });
		worker.kill('SIGTERM');
	});
});
