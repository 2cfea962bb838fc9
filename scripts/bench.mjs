// `npm run bench`: Ebbline's throughput and latency, measured in one run on a fresh database with the
// app started the way `npm start` starts it (built with adapter-node, workers embedded). Prints a table
// and writes bench/results.json. Stops everything it started and drops its database at the end.
//
//   1. feed, end to end: 20,000 creatinine and albumin results for 5,000 active orders (2,500 invented
//      patients) posted as FHIR bundles of 100 entries to POST /api/v1/feed, timed until every order
//      has an assessment newer than its patient's newest result (flags are evaluated in the same
//      transaction as the assessment) and the order.reassess queue is empty;
//   2. bare pg-boss: 20,000 empty jobs sent and worked with order.reassess's queue policy and work
//      options and the same worker loop (jobs/worker.ts), in the same run;
//   3. assess() calls per second on one core (scripts/bench-clinical.ts);
//   4. GET /api/v1/flags latency with 10,000 open flags, 20 concurrent signed-in clients for 10 s, as
//      served (board cache on) and again from a second app process with the cache off;
//   5. rules.replay over 50,000 active orders, sent to the app's worker as a publish would;
//   6. freshness: from the feed's 202 to the board API showing the result's flag (or that there is none),
//      during a burst and at a steady 50 results/s (scripts/bench/freshness.mjs), before stages 4 and 5.
//
// A full run writes bench/results.json; `--only=…` merges the stages it ran into it (see stagesToRun).
import { execFileSync, spawnSync } from 'node:child_process';
import { mkdirSync, readdirSync, readFileSync, rmSync, writeFileSync } from 'node:fs';
import os from 'node:os';
import path from 'node:path';
import { bin, signIn, withStack } from './lib/stack.mjs';
import { scaleStage, SCALE_TARGETS } from './bench/scale.mjs';
import { freshness, freshnessRows } from './bench/freshness.mjs';
import { log, root } from './lib/system.mjs';

const TARGETS = { feedResultsPerS: 1000, ratioToBare: 0.5, boardP95Ms: 50, replayS: 30, freshnessBurstP95Ms: 2000, freshnessSteadyP95Ms: 500 };
const SENDERS = 4;
const BOARD_FLAGS = 10_000;
const REPLAY_ORDERS = 50_000;
const BARE_JOBS = 20_000;
// the scale stage's network: Larkspur-sized sites of 120 beds (8: 960 beds)
const SCALE_SITES = Number(process.env.EBBLINE_BENCH_SCALE_SITES ?? 8);

const sleep = (ms) => new Promise((r) => setTimeout(r, ms));
const round = (n, d = 0) => Math.round(n * 10 ** d) / 10 ** d;

function machine() {
	const cpu =
		readFileSync('/proc/cpuinfo', 'utf8')
			.match(/^model name\s*:\s*(.+)$/m)?.[1]
			?.trim() ??
		os.cpus()[0]?.model ??
		'unknown';
	const nproc = Number(execFileSync('nproc', { encoding: 'utf8' }).trim());
	// the load average says how much else was running: the figures are only comparable on a quiet machine
	const [load1, load5, load15] = os.loadavg().map((l) => round(l, 1));
	return {
		nproc,
		cpu,
		memoryGiB: round(os.totalmem() / 2 ** 30, 1),
		node: process.version,
		os: `${os.type()} ${os.release()}`,
		date: new Date().toISOString(),
		loadAverage: { '1m': load1, '5m': load5, '15m': load15 }
	};
}

function percentile(sorted, p) {
	if (sorted.length === 0) return null;
	const i = Math.min(sorted.length - 1, Math.max(0, Math.ceil((p / 100) * sorted.length) - 1));
	return sorted[i];
}

/**
 * CPU-seconds the whole machine spent busy so far (all processes: app, worker, PostgreSQL and this
 * script), from /proc/stat. A stage's difference says what its work cost, whatever the wall clock.
 */
const CLOCK_TICKS_PER_S = Number(execFileSync('getconf', ['CLK_TCK'], { encoding: 'utf8' }).trim()) || 100;
function cpuBusyS() {
	const [user, nice, system, , , irq, softirq] = readFileSync('/proc/stat', 'utf8').split('\n')[0].trim().split(/\s+/).slice(1).map(Number);
	return (user + nice + system + irq + softirq) / CLOCK_TICKS_PER_S;
}

/**
 * CPU-seconds used so far by each process of the app (the web process, a separate `npm run worker`
 * if EBBLINE_BENCH_SPLIT_WORKERS is set) and of PostgreSQL, per pid, from /proc.
 */
function processCpu(appPid) {
	const byPid = new Map();
	for (const pid of readdirSync('/proc')) {
		if (!/^\d+$/.test(pid)) continue;
		try {
			const stat = readFileSync(`/proc/${pid}/stat`, 'utf8');
			const comm = stat.slice(stat.indexOf('(') + 1, stat.lastIndexOf(')'));
			const fields = stat.slice(stat.lastIndexOf(')') + 2).split(' ');
			const seconds = (Number(fields[11]) + Number(fields[12])) / CLOCK_TICKS_PER_S;
			let group = null;
			if (comm === 'postgres') group = 'postgres';
			else if (Number(pid) === appPid) group = 'app';
			else if (readFileSync(`/proc/${pid}/cmdline`, 'utf8').includes('jobs/worker.ts')) group = 'worker';
			if (group) byPid.set(pid, { group, seconds });
		} catch {
			// the process ended meanwhile
		}
	}
	return byPid;
}

/** What each group used between two processCpu() readings (a process started in between counts whole). */
function cpuBetween(before, after) {
	const out = { app: 0, worker: 0, postgres: 0 };
	for (const [pid, { group, seconds }] of after) out[group] += seconds - (before.get(pid)?.seconds ?? 0);
	for (const key of Object.keys(out)) out[key] = round(out[key], 1);
	return out;
}

/** Posts the bundles with a few concurrent senders, as several lab interfaces would. */
async function postBundles(baseUrl, token, bundles) {
	let next = 0;
	const statuses = {};
	let accepted = 0;
	let quarantined = 0;
	const sender = async () => {
		while (next < bundles.length) {
			const body = bundles[next++];
			const response = await fetch(`${baseUrl}/api/v1/feed`, {
				method: 'POST',
				headers: { authorization: `Bearer ${token}`, 'content-type': 'application/fhir+json' },
				body
			});
			statuses[response.status] = (statuses[response.status] ?? 0) + 1;
			const out = await response.json().catch(() => null);
			if (response.status !== 202) throw new Error(`feed answered ${response.status}: ${JSON.stringify(out).slice(0, 300)}`);
			accepted += out.counts.accepted;
			quarantined += out.counts.quarantined;
		}
	};
	await Promise.all(Array.from({ length: SENDERS }, sender));
	return { statuses, accepted, quarantined };
}

async function feedThroughput(stack, sql, fixture) {
	const bundles = JSON.parse(readFileSync(fixture.bundlesPath, 'utf8'));
	const [{ start }] = await sql`select now() as start`;
	const cpu0 = cpuBusyS();
	const processes0 = processCpu(stack.app.pid);
	const t0 = performance.now();
	let postedMs = null;
	const posting = postBundles(stack.baseUrl, fixture.token, bundles).then((r) => {
		postedMs = performance.now() - t0;
		return r;
	});
	let postError = null;
	posting.catch((e) => (postError = e));
	let doneMs = null;
	let lastReport = 0;
	// EBBLINE_BENCH_NO_WORKERS: nothing re-assesses, so the stage ends when the last bundle is stored
	const intakeOnly = Boolean(process.env.EBBLINE_BENCH_NO_WORKERS);
	while (doneMs === null) {
		await sleep(200);
		if (postError) throw postError;
		if (postedMs === null) continue;
		if (intakeOnly) {
			doneMs = postedMs;
			break;
		}
		const [state] = await sql`
			select
				(select count(*)::int from pgboss.job where name = 'order.reassess' and state < 'completed') as pending,
				(select count(*)::int from orders o
					join (select patient_id, max(created_at) as last from lab_results group by patient_id) r on r.patient_id = o.patient_id
					where o.status = 'active'
						and not exists (select 1 from assessments a where a.order_id = o.id and a.created_at > r.last)) as stale`;
		if (state.pending === 0 && state.stale === 0) doneMs = performance.now() - t0;
		else if (performance.now() - lastReport > 5000) {
			lastReport = performance.now();
			log(`  … ${state.pending} jobs waiting, ${state.stale} orders not yet re-assessed (${round((performance.now() - t0) / 1000, 1)} s)`);
		}
		if (performance.now() - t0 > 15 * 60_000) throw new Error('the feed burst did not finish within 15 minutes');
	}
	const cpuS = cpuBusyS() - cpu0;
	const cpuByProcess = cpuBetween(processes0, processCpu(stack.app.pid));
	const posted = await posting;
	const [counts] = await sql`
		select
			(select count(*)::int from lab_results where created_at >= ${start}) as results_stored,
			(select count(*)::int from assessments where created_at >= ${start}) as assessments,
			(select count(distinct order_id)::int from assessments where created_at >= ${start}) as orders_assessed,
			(select count(*)::int from pgboss.job where name = 'order.reassess' and created_on >= ${start}) as jobs,
			(select count(*)::int from flags where state <> 'closed') as open_flags,
			(select count(*)::int from flags f where f.state <> 'closed' and f.assessment_id <> (
				select a.id from assessments a where a.order_id = f.order_id order by a.at desc, a.created_at desc limit 1)) as flags_behind`;
	const results = fixture.burstResults;
	return {
		results,
		bundles: bundles.length,
		entriesPerBundle: 100,
		senders: SENDERS,
		orders: fixture.orders,
		patients: fixture.patients,
		accepted: posted.accepted,
		quarantined: posted.quarantined,
		httpStatuses: posted.statuses,
		postedS: round(postedMs / 1000, 2),
		totalS: round(doneMs / 1000, 2),
		ingestResultsPerS: round(results / (postedMs / 1000)),
		resultsPerS: round(results / (doneMs / 1000)),
		cpuS: round(cpuS, 1),
		cpuMsPerResult: round((cpuS * 1000) / results, 3),
		cpuSByProcess: cpuByProcess,
		...(intakeOnly ? { intakeOnly: true } : {}),
		resultsStored: counts.results_stored,
		reassessJobs: counts.jobs,
		assessments: counts.assessments,
		ordersAssessed: counts.orders_assessed,
		openFlags: counts.open_flags,
		openFlagsBehindLatestAssessment: counts.flags_behind
	};
}

/**
 * pg-boss alone: the same queue policy, work options and worker loop as order.reassess, empty handler.
 * Three runs of 20,000 jobs (a few seconds each, so one run is easily disturbed); the median counts.
 */
async function barePgBoss(stack, fixture) {
	const { default: PgBoss } = await import('pg-boss');
	const { workQueue } = await import('../src/lib/server/queue/work-loop.js');
	const { queue, work } = fixture.reassess;
	const runs = [];
	for (let run = 1; run <= 3; run++) {
		const boss = new PgBoss({ connectionString: stack.databaseUrl, schema: 'pgboss', max: 6 });
		boss.on('error', (e) => log(`bare pg-boss error: ${e.message}`));
		await boss.start();
		const name = `bench.empty.${run}`;
		await boss.createQueue(name, { name, ...queue });
		let worked = 0;
		await workQueue(
			boss,
			name,
			work,
			async (jobs) => {
				worked += jobs.length;
			},
			fixture.reassess.concurrency ?? 1
		);
		const cpu0 = cpuBusyS();
		const t0 = performance.now();
		let next = 0;
		const sender = async () => {
			while (next < BARE_JOBS) {
				const from = next;
				next += 100;
				const jobs = [];
				for (let i = from; i < Math.min(from + 100, BARE_JOBS); i++) jobs.push({ name, data: { orderId: `bench-${i}` }, singletonKey: `bench-${i}` });
				await boss.insert(jobs);
			}
		};
		await Promise.all(Array.from({ length: SENDERS }, sender));
		const sentMs = performance.now() - t0;
		const db = boss.getDb();
		for (;;) {
			await sleep(50);
			const { rows } = await db.executeSql(`select count(*)::int as n from pgboss.job where name = $1 and state = 'completed'`, [name]);
			if (rows[0].n >= BARE_JOBS) break;
			if (performance.now() - t0 > 10 * 60_000) throw new Error('bare pg-boss did not finish within 10 minutes');
		}
		const totalMs = performance.now() - t0;
		const cpuS = cpuBusyS() - cpu0;
		await boss.stop({ graceful: true, wait: true, timeout: 5000 });
		runs.push({
			worked,
			sentS: round(sentMs / 1000, 2),
			totalS: round(totalMs / 1000, 2),
			jobsPerS: round(BARE_JOBS / (totalMs / 1000)),
			cpuS: round(cpuS, 1)
		});
	}
	const median = [...runs].sort((a, b) => a.jobsPerS - b.jobsPerS)[1];
	return {
		jobs: BARE_JOBS,
		workers: fixture.reassess.concurrency ?? 1,
		batchSize: work.batchSize,
		...median,
		cpuMsPerJob: round((median.cpuS * 1000) / BARE_JOBS, 3),
		runs
	};
}

function assessRate() {
	const result = spawnSync(bin('tsx'), ['scripts/bench-clinical.ts', '--orders=50000'], { cwd: root, encoding: 'utf8' });
	const cpu = result.stdout.match(/assess\(\): ([\d,]+) calls per CPU-second/);
	const wall = result.stdout.match(/([\d,]+) calls\/s wall clock \(median; best ([\d,]+)\)/);
	if (result.status !== 0 || !cpu || !wall) throw new Error(`bench-clinical failed or printed something unexpected: ${result.stderr || result.stdout}`);
	const num = (s) => Number(s.replace(/,/g, ''));
	return {
		callsPerCpuS: num(cpu[1]),
		callsPerS: num(wall[1]),
		bestCallsPerS: num(wall[2]),
		orders: 50_000,
		source: 'scripts/bench-clinical.ts --orders=50000'
	};
}

/**
 * Tops the open flags up to 10,000 (one per active order, each holding one to three findings of rules of
 * the active set), set-based.
 */
async function openFlags(sql) {
	const [{ n: before }] = await sql`select count(*)::int as n from flags where state <> 'closed'`;
	const need = BOARD_FLAGS - before;
	const [{ n: active }] = await sql`select count(*)::int as n from orders where status = 'active'`;
	// one open flag per order: the board's 10,000 flags need 10,000 active orders
	if (need > 0 && active < BOARD_FLAGS) await replayFixture(sql);
	if (need > 0) {
		await sql`
			with rules as (
				select rv.id as version_id, r->>'key' as rule_key, r->>'title' as title, row_number() over () as k
				from rule_versions rv, jsonb_array_elements(rv.rules) r where rv.status = 'active'
			),
			latest as (
				select distinct on (a.order_id) a.order_id, a.patient_id, a.id as assessment_id from assessments a
				join orders o on o.id = a.order_id and o.status = 'active'
				where not exists (select 1 from flags f where f.order_id = a.order_id and f.state <> 'closed')
				order by a.order_id, a.at desc, a.created_at desc
			),
			candidates as (
				select l.*, row_number() over (order by md5(l.order_id::text)) as n from latest l
			),
			inserted as (
				insert into flags (order_id, patient_id, rule_key, rule_version_id, assessment_id, state, severity, priority, finding, facts)
				select c.order_id, c.patient_id, r.rule_key, r.version_id, c.assessment_id, 'new',
					(array['high','moderate','low'])[1 + (c.n % 3)]::severity, 10 + (c.n % 900) / 10.0,
					'bench: ' || r.title, '{}'::jsonb
				from candidates c join rules r on r.k = 1 + (c.n % (select count(*) from rules))
				where c.n <= ${need}
				returning id, rule_key, rule_version_id, assessment_id, severity, priority
			),
			findings as (
				insert into flag_findings (flag_id, rule_key, rule_version_id, severity, priority, text, assessment_id, raised_assessment_id)
				select i.id, r.rule_key, i.rule_version_id, case when r.rule_key = i.rule_key then i.severity else 'low'::severity end,
					case when r.rule_key = i.rule_key then i.priority else 5 end, 'bench: ' || r.title, i.assessment_id, i.assessment_id
				from inserted i join rules r on r.rule_key = i.rule_key or (abs(hashtext(i.id::text || r.rule_key)) % 6 = 0)
				returning flag_id
			)
			insert into flag_events (flag_id, kind, to_state, data) select id, 'opened', 'new', '{"bench":true}'::jsonb from inserted`;
	}
	const [{ n }] = await sql`select count(*)::int as n from flags where state <> 'closed'`;
	if (n < BOARD_FLAGS) throw new Error(`the bench needs ${BOARD_FLAGS} active orders for ${BOARD_FLAGS} open flags (one per order); it has ${n}`);
	await sql`analyze flags`;
	await sql`analyze flag_findings`;
	return { before, open: n };
}

/** 20 signed-in clients asking for the board's first page for 10 s. */
async function hammerBoard(baseUrl) {
	const cookie = await signIn(baseUrl, 'pharmacist@larkspur.test', 'larkspur-demo-2026');
	const { default: autocannon } = await import('autocannon');
	const latencies = [];
	const statuses = {};
	const instance = autocannon({
		url: `${baseUrl}/api/v1/flags`,
		connections: 20,
		duration: 10,
		headers: { cookie, accept: 'application/json' }
	});
	instance.on('response', (_client, status, _bytes, ms) => {
		statuses[status] = (statuses[status] ?? 0) + 1;
		latencies.push(ms);
	});
	const result = await instance;
	latencies.sort((a, b) => a - b);
	const sample = await fetch(`${baseUrl}/api/v1/flags`, { headers: { cookie } }).then((r) => r.json());
	return {
		connections: 20,
		durationS: 10,
		requests: latencies.length,
		requestsPerS: round(result.requests.average),
		statuses,
		rowsPerPage: sample.rows?.length ?? null,
		p50Ms: round(percentile(latencies, 50), 1),
		p95Ms: round(percentile(latencies, 95), 1),
		p99Ms: round(percentile(latencies, 99), 1),
		maxMs: round(latencies[latencies.length - 1], 1)
	};
}

/**
 * The board as the app serves it (pages cached until a change is notified), then the same load on a
 * second app process with the cache off, so the cost of the query itself stays in view.
 */
async function boardLatency(stack, sql) {
	const flags = await openFlags(sql);
	const cached = await hammerBoard(stack.baseUrl);
	const uncachedApp = await stack.startAnotherApp({ EBBLINE_BOARD_CACHE: 'off', EBBLINE_WORKERS: 'off' });
	let uncached;
	try {
		uncached = await hammerBoard(uncachedApp.baseUrl);
	} finally {
		await uncachedApp.stop();
	}
	return { openFlags: flags.open, ...cached, uncached };
}

/**
 * 45,000 more active orders with an assessment each, set-based: every order of the feed fixture copied
 * nine times onto copies of its patient, with a copy of the order's latest assessment.
 */
async function replayFixture(sql) {
	const [{ n: active }] = await sql`select count(*)::int as n from orders where status = 'active'`;
	const copies = Math.ceil((REPLAY_ORDERS - active) / active);
	await sql.begin(async (tx) => {
		await tx`create temp table pc on commit drop as select p.id as src, g, gen_random_uuid() as id from patients p, generate_series(1, ${copies}::int) g
			where exists (select 1 from orders o where o.patient_id = p.id and o.status = 'active')`;
		await tx`insert into patients (id, mrn, given_name, family_name, birth_date, sex)
			select pc.id, p.mrn || '-' || pc.g, p.given_name, p.family_name, p.birth_date, p.sex from pc join patients p on p.id = pc.src`;
		await tx`create temp table oc on commit drop as
			select o.id as src, pc.g, gen_random_uuid() as id, pc.id as patient_id,
				row_number() over (order by o.id, pc.g) as n
			from orders o join pc on pc.src = o.patient_id where o.status = 'active'`;
		await tx`delete from oc where n > ${REPLAY_ORDERS - active}`;
		await tx`insert into orders (id, patient_id, encounter_id, agent_id, prescriber_id, prescriber_name, dose_mg, interval_h, infusion_h, route, status, start_at)
			select oc.id, oc.patient_id, null, o.agent_id, o.prescriber_id, o.prescriber_name, o.dose_mg, o.interval_h, o.infusion_h, o.route, 'active', o.start_at
			from oc join orders o on o.id = oc.src`;
		await tx`insert into assessments (order_id, patient_id, at, complete, crcl_ml_min, half_life_h, albumin_gl, result, input, trace)
			select oc.id, oc.patient_id, a.at, a.complete, a.crcl_ml_min, a.half_life_h, a.albumin_gl, a.result, a.input, a.trace
			from oc join lateral (select * from assessments a where a.order_id = oc.src order by a.at desc, a.created_at desc limit 1) a on true`;
	});
	await sql`analyze orders`;
	await sql`analyze assessments`;
	const [{ n }] = await sql`select count(*)::int as n from orders where status = 'active'`;
	return n;
}

async function replayTime(stack, sql) {
	const orders = await replayFixture(sql);
	const { default: PgBoss } = await import('pg-boss');
	const boss = new PgBoss({ connectionString: stack.databaseUrl, schema: 'pgboss', max: 2 });
	boss.on('error', () => {});
	await boss.start();
	const t0 = performance.now();
	const id = await boss.send('rules.replay', { reason: 'manual' });
	if (!id) throw new Error('rules.replay job was not accepted (is a replay already queued?)');
	let job;
	for (;;) {
		await sleep(100);
		job = await boss.getJobById('rules.replay', id);
		if (job?.state === 'completed') break;
		if (job?.state === 'failed' || job?.state === 'retry') throw new Error(`rules.replay ${job.state}: ${JSON.stringify(job.output)}`);
		if (performance.now() - t0 > 15 * 60_000) throw new Error('rules.replay did not finish within 15 minutes');
	}
	const totalMs = performance.now() - t0;
	await boss.stop({ graceful: false, wait: true, timeout: 2000 });
	const out = Array.isArray(job.output) ? job.output[0] : job.output;
	return {
		activeOrders: orders,
		replayedOrders: out?.orders ?? null,
		handlerS: out?.ms ? round(out.ms / 1000, 2) : null,
		totalS: round(totalMs / 1000, 2),
		changes: out?.totals ?? null
	};
}

/** The scale stage's rows: each measure at 1, 3 and 12 months, and its growth. */
function scaleRows(s, ok) {
	const [one, three, twelve] = s.checkpoints;
	const at = (f, unit) => `${f(one)} / ${f(three)} / ${f(twelve)} ${unit}`;
	const t = SCALE_TARGETS;
	const g = s.growth12to1;
	const r12 = twelve.rows;
	return [
		[
			`scale: ${s.network.beds} beds (${s.network.sites} sites), 12 months`,
			`${r12.results.toLocaleString('en')} results`,
			`${r12.orders.toLocaleString('en')} orders, ${r12.flags.toLocaleString('en')} flags, ${r12.flag_events.toLocaleString('en')} flag events, ${r12.recommendations.toLocaleString('en')} recommendations, ${r12.audit_rows.toLocaleString('en')} audit rows; template ${s.template.seconds} s, bulk copies ${s.bulkBuildS} s`,
			''
		],
		[
			'  board API p95, 20 clients (1/3/12 mo)',
			at((c) => c.board.p95Ms, 'ms'),
			`growth ${g.boardP95}×`,
			`≤ ${t.boardP95Ms} ms: ${ok(s.targets.board)}; ≤ ${t.boardGrowth}×: ${ok(s.targets.boardGrowth)}`
		],
		[
			'  the same, board cache off (4 clients)',
			at((c) => c.boardUncached.p95Ms, 'ms'),
			`growth ${g.boardUncachedP95}×: the query itself`,
			'shown for the growth'
		],
		['  patient page data p95, long stay', at((c) => c.patient.p95Ms, 'ms'), `growth ${g.patientP95}×`, `≤ ${t.patientP95Ms} ms: ${ok(s.targets.patient)}`],
		[
			'  report, whole period, all wards',
			at((c) => c.report.medianS, 's'),
			`growth ${g.report}× (the period grows 12×); CSV exports at 12 months: slowest ${Math.max(...Object.values(twelve.reportExportsMs))} ms`,
			`≤ ${t.reportS} s: ${ok(s.targets.report)}`
		],
		['  back-test, one changed rule, 90 days', at((c) => c.backTest.totalS, 's'), `growth ${g.backTest}×`, `≤ ${t.backTestS} s: ${ok(s.targets.backTest)}`],
		['  audit log filtered by action, p95', at((c) => c.audit.p95Ms, 'ms'), `growth ${g.auditP95}×`, `≤ ${t.auditP95Ms} ms: ${ok(s.targets.audit)}`],
		['  database size', at((c) => c.databaseMiB, 'MiB'), `${twelve.databaseMiBPerMonth} MiB per month of history at 12 months`, '']
	];
}

function table(r) {
	const ok = (b) => (b ? 'met' : 'MISSED');
	const rows = [];
	if (r.feed)
		rows.push([
			r.feed.intakeOnly ? 'feed intake only (no workers)' : 'feed end to end',
			`${r.feed.resultsPerS.toLocaleString('en')} results/s`,
			`${r.feed.results.toLocaleString('en')} results, ${r.feed.orders.toLocaleString('en')} orders, ${r.feed.totalS} s (posted in ${r.feed.postedS} s); ${r.feed.cpuMsPerResult} CPU-ms per result`,
			r.feed.intakeOnly ? 'no target (intake only)' : `≥ ${TARGETS.feedResultsPerS} results/s: ${ok(r.targets.feed)}`
		]);
	if (r.feed) {
		const c = r.feed.cpuSByProcess;
		const split = r.feed.intakeOnly
			? `web process (feed, no workers) ${c.app} s`
			: c.worker > 0
				? `web process (feed) ${c.app} s, worker ${c.worker} s`
				: `app (feed and workers) ${c.app} s`;
		rows.push(['  CPU used', `${r.feed.cpuS} s`, `${split}, PostgreSQL ${c.postgres} s; the rest is this script and the system`, '']);
	}
	if (r.bare)
		rows.push([
			'bare pg-boss',
			`${r.bare.jobsPerS.toLocaleString('en')} jobs/s`,
			`${r.bare.jobs.toLocaleString('en')} empty jobs, ${r.bare.totalS} s (median of ${r.bare.runs.map((x) => x.jobsPerS.toLocaleString('en')).join(', ')}); ${r.bare.cpuMsPerJob} CPU-ms per job`,
			''
		]);
	if (r.ratio !== undefined) rows.push(['ratio end to end / bare', `${r.ratio}`, '', `≥ ${TARGETS.ratioToBare}: ${ok(r.targets.ratio)}`]);
	if (r.assess)
		rows.push([
			'assess() one core',
			`${r.assess.callsPerS.toLocaleString('en')} calls/s`,
			`wall clock, median pass (best ${r.assess.bestCallsPerS.toLocaleString('en')}); ${r.assess.callsPerCpuS.toLocaleString('en')} per CPU-second`,
			''
		]);
	if (r.board) {
		const latency = (b) => `p50 ${b.p50Ms} ms, p95 ${b.p95Ms} ms, p99 ${b.p99Ms} ms`;
		rows.push([
			'GET /api/v1/flags',
			latency(r.board),
			`${r.board.openFlags.toLocaleString('en')} open flags, 20 clients, ${r.board.requests.toLocaleString('en')} requests in 10 s`,
			`p95 ≤ ${TARGETS.boardP95Ms} ms: ${ok(r.targets.board)}`
		]);
		rows.push([
			'  same, board cache off',
			latency(r.board.uncached),
			`${r.board.uncached.requests.toLocaleString('en')} requests in 10 s (every request queries PostgreSQL)`,
			''
		]);
	}
	if (r.freshness) rows.push(...freshnessRows(r.freshness, TARGETS, ok));
	if (r.replay)
		rows.push([
			'rules.replay',
			`${r.replay.totalS} s`,
			`${(r.replay.replayedOrders ?? 0).toLocaleString('en')} active orders (handler ${r.replay.handlerS} s)`,
			`≤ ${TARGETS.replayS} s: ${ok(r.targets.replay)}`
		]);
	if (r.scale) rows.push(...scaleRows(r.scale, ok));
	const widths = [0, 1, 2, 3].map((i) => Math.max(...rows.map((row) => row[i].length), 4));
	const line = (row) => row.map((c, i) => c.padEnd(widths[i])).join('  ');
	return [
		`${r.machine.nproc} × ${r.machine.cpu}, Node ${r.machine.node}, ${r.machine.date}, load average ${r.machine.loadAverage['15m']} (15 min)`,
		...rows.map(line)
	].join('\n');
}

/**
 * `npm run bench -- --only=board,replay` runs some stages (to re-measure one): their figures replace
 * those in bench/results.json and the rest are kept. `measured.<stage>` says on what machine, when and
 * under what load each stage was last measured; `machine` is the last full run's.
 */
function stagesToRun() {
	const arg = process.argv.slice(2).find((a) => a.startsWith('--only='));
	const all = ['feed', 'bare', 'freshness', 'assess', 'board', 'replay', 'scale'];
	if (!arg) {
		if (process.env.EBBLINE_BENCH_NO_WORKERS) throw new Error('EBBLINE_BENCH_NO_WORKERS runs no workers: use it with --only=feed or --only=feed,bare');
		return { stages: new Set(all), full: true };
	}
	const chosen = arg.slice('--only='.length).split(',').filter(Boolean);
	const unknown = chosen.filter((c) => !all.includes(c));
	if (unknown.length) throw new Error(`unknown bench stage ${unknown.join(', ')}; choose from ${all.join(', ')}`);
	if (process.env.EBBLINE_BENCH_NO_WORKERS && chosen.some((c) => c === 'board' || c === 'replay' || c === 'freshness'))
		throw new Error('EBBLINE_BENCH_NO_WORKERS runs no workers: choose from feed, bare and assess');
	return { stages: new Set(chosen), full: false };
}

/** This run's stages written over an earlier bench/results.json, the other stages' figures kept. */
function mergeResults(previous, r, stages) {
	const out = { ...previous, measured: { ...previous.measured }, targets: { ...previous.targets, values: { ...previous.targets?.values, ...TARGETS } } };
	// figures from before stages were recorded one by one were measured by the last full run
	for (const key of ['feed', 'bare', 'freshness', 'assess', 'board', 'replay', 'scale'])
		if (previous[key] && !out.measured[key]) out.measured[key] = previous.machine;
	for (const key of stages) {
		out[key] = r[key];
		out.measured[key] = r.measured[key];
	}
	for (const [key, met] of Object.entries(r.targets)) if (key !== 'values') out.targets[key] = met;
	if (out.feed && out.bare && !out.feed.intakeOnly) {
		out.ratio = round(out.feed.resultsPerS / out.bare.jobsPerS, 2);
		out.targets.ratio = out.ratio >= TARGETS.ratioToBare;
	}
	return out;
}

function writeResults(r, stages, full) {
	const file = path.join(root, 'bench/results.json');
	// runs that change how the app runs measure something else than the figures in the file
	const variant = ['EBBLINE_BENCH_NO_WORKERS', 'EBBLINE_BENCH_SPLIT_WORKERS', 'EBBLINE_BENCH_PROFILE_DIR'].filter((v) => process.env[v]);
	if (variant.length) {
		console.log(`(${variant.join(', ')} set: bench/results.json left as it was)`);
		return;
	}
	let previous = null;
	if (!full) {
		try {
			previous = JSON.parse(readFileSync(file, 'utf8'));
		} catch {
			// no earlier results: this run's stages are the file
		}
	}
	const out = previous ? mergeResults(previous, r, stages) : r;
	mkdirSync(path.dirname(file), { recursive: true });
	writeFileSync(file, `${JSON.stringify(out, null, '\t')}\n`);
	console.log(previous ? `merged into bench/results.json (${[...stages].join(', ')}; other stages kept)` : 'written to bench/results.json');
}

async function main() {
	const { stages, full } = stagesToRun();
	const total = stages.size;
	let step = 0;
	const onMainStack = [...stages].some((s) => s !== 'scale');
	const results = !onMainStack
		? { machine: machine(), measured: {}, targets: { values: TARGETS } }
		: await withStack('bench', async (stack) => {
				stack.migrate();
				log('fixture: 2,500 invented patients, 5,000 active orders through the feed, assessed; 20,000 results to post');
				const tmp = path.join(os.tmpdir(), `${stack.runId}-bundles.json`);
				const freshnessPath = path.join(os.tmpdir(), `${stack.runId}-freshness.json`);
				let fixture;
				try {
					fixture = { ...stack.fixture('bench', tmp, ...(stages.has('freshness') ? [freshnessPath] : [])), bundlesPath: tmp, freshnessPath };
					await stack.startApp();
					const { default: postgres } = await import('postgres');
					const sql = postgres(stack.databaseUrl, { max: 2, onnotice: () => {} });
					try {
						// let the workers settle (queues created, schedules registered) before timing
						await sleep(3000);
						const r = { machine: machine(), measured: {}, targets: { values: TARGETS } };
						const stage = (key, label) => {
							log(`${++step}/${total} ${label}`);
							r.measured[key] = machine();
						};
						if (stages.has('feed')) {
							stage('feed', process.env.EBBLINE_BENCH_NO_WORKERS ? 'feed intake only (no workers)' : 'feed end to end');
							r.feed = await feedThroughput(stack, sql, fixture);
							// the intake alone is not what the targets are about
							if (!r.feed.intakeOnly) r.targets.feed = r.feed.resultsPerS >= TARGETS.feedResultsPerS;
							log(`   ${r.feed.resultsPerS} results/s (${r.feed.assessments} assessments from ${r.feed.reassessJobs} order.reassess jobs)`);
						}
						if (stages.has('bare')) {
							stage('bare', 'bare pg-boss');
							r.bare = await barePgBoss(stack, fixture);
							log(`   ${r.bare.jobsPerS} jobs/s (median of three runs)`);
						}
						if (r.feed && r.bare && !r.feed.intakeOnly) {
							r.ratio = round(r.feed.resultsPerS / r.bare.jobsPerS, 2);
							r.targets.ratio = r.ratio >= TARGETS.ratioToBare;
						}
						// before the board and replay stages, which add flags and orders
						if (stages.has('freshness')) {
							stage('freshness', 'freshness: from the feed to the board API, burst and 50 results/s');
							r.freshness = await freshness(stack, sql, fixture);
							r.targets.freshnessBurst = r.freshness.burst.resultsNotShown === 0 && r.freshness.burst.p95Ms <= TARGETS.freshnessBurstP95Ms;
							r.targets.freshnessSteady = r.freshness.steady.resultsNotShown === 0 && r.freshness.steady.p95Ms <= TARGETS.freshnessSteadyP95Ms;
						}
						if (stages.has('assess')) {
							stage('assess', 'assess() on one core');
							r.assess = assessRate();
						}
						if (stages.has('board')) {
							stage('board', 'board API latency');
							r.board = await boardLatency(stack, sql);
							r.targets.board = r.board.p95Ms <= TARGETS.boardP95Ms;
						}
						if (stages.has('replay')) {
							stage('replay', `rules.replay over ${REPLAY_ORDERS.toLocaleString('en')} active orders`);
							r.replay = await replayTime(stack, sql);
							r.targets.replay = r.replay.totalS <= TARGETS.replayS;
						}
						return r;
					} finally {
						await sql.end({ timeout: 5 });
					}
				} finally {
					rmSync(tmp, { force: true });
					rmSync(freshnessPath, { force: true });
				}
			});
	// the scale stage builds a network's year on a database of its own
	if (stages.has('scale')) {
		log(`${++step}/${total} scale: ${SCALE_SITES} sites × 120 beds, 12 months of history`);
		results.measured.scale = machine();
		results.targets.values = { ...results.targets.values, scale: SCALE_TARGETS };
		results.scale = await withStack('scale', async (stack) => {
			stack.migrate();
			return scaleStage(stack, { sites: SCALE_SITES, log });
		});
		for (const [key, met] of Object.entries(results.scale.targets)) results.targets[`scale.${key}`] = met;
	}
	console.log(`\n${table(results)}\n`);
	writeResults(results, stages, full);
}

main().catch((error) => {
	console.error(`[ebbline] bench failed: ${error.stack ?? error.message}`);
	process.exitCode = 1;
});
