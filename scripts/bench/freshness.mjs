// `npm run bench` stage "freshness": how long after the feed's 202 the board API shows what a result
// means for its patient's orders: the order's flag, or that it has none, as of an assessment that used
// that result (or a newer one of the same test). Measured as a user of the API sees it: signed in as a
// pharmacist, through the board cache, polling GET /api/v1/flags?order=… for the orders still waiting.
//
//   (a) burst: 20,000 results in 200 bundles of 100 posted as fast as 4 senders can (the feed stage's
//       shape, drawn later); 200 of the 2,500 patients are probed (1,600 results, 400 orders);
//   (b) steady: 50 results/s for 60 s (a bundle of 8 results, four patients, every 160 ms, whether or
//       not the previous one was answered); every result is probed.
//
// How the probe knows: each board row carries `creatinineAt` and `albuminAt`, when the newest creatinine
// and albumin its assessment used were taken; with `order=` the answer also lists each named order's
// newest assessment (`orders`), read before the rows, so an order with no row had no open flag as of
// that assessment or a newer one. A result counts as shown at the first answer in which every active
// order of its patient shows (as a row, or in `orders` with no row) an assessment whose newest result
// of that test was taken no earlier than this result. Every result of the bench is its patient's
// newest of its test when posted, so "no earlier" means "this one or a newer one of the same patient".
import { readFileSync } from 'node:fs';
import { signIn } from '../lib/stack.mjs';
import { log } from '../lib/system.mjs';

/** how often each waiting order is asked about (a poll cycle starts this long after the previous started, or when it ends) */
export const POLL_MS = 100;
/** order ids per request (the API's limit for `order=`) and requests in flight at once */
const ORDERS_PER_REQUEST = 200;
const PROBE_CLIENTS = 3;
const BURST_SENDERS = 4;
const BURST_PROBED_PATIENTS = 200;
const STEADY_EVERY_MS = 160;
/** how long the probe waits, after the last 202, for the rest to show */
const SETTLE_MS = 60_000;

const sleep = (ms) => new Promise((r) => setTimeout(r, ms));
const round = (n, d = 0) => (n === null ? null : Math.round(n * 10 ** d) / 10 ** d);

function percentile(sorted, p) {
	if (sorted.length === 0) return null;
	const i = Math.min(sorted.length - 1, Math.max(0, Math.ceil((p / 100) * sorted.length) - 1));
	return sorted[i];
}

function summary(values) {
	const sorted = [...values].sort((a, b) => a - b);
	return {
		p50Ms: round(percentile(sorted, 50)),
		p95Ms: round(percentile(sorted, 95)),
		p99Ms: round(percentile(sorted, 99)),
		maxMs: round(sorted.at(-1) ?? null)
	};
}

/**
 * The probe: results waiting to show, per order; a loop that asks the board API about every order
 * with something waiting, at most every POLL_MS, in requests of up to 200 orders, 3 at a time.
 */
function createProbe(baseUrl, cookie, ordersByMrn) {
	/** order id → results waiting on it: { result, analyte, atMs } */
	const waiting = new Map();
	const results = [];
	const requestMs = [];
	const cycleMs = [];
	let stopped = false;
	let failure = null;

	function add(probed, t202) {
		for (const r of probed) {
			const orders = ordersByMrn[r.mrn] ?? [];
			if (orders.length === 0) throw new Error(`freshness: no active order for patient ${r.mrn}`);
			// the feed keeps a result's time to the second: a finer one could never be matched
			if (Date.parse(r.at) % 1000 !== 0) throw new Error(`freshness: result time ${r.at} is not a whole second`);
			const result = { t202, pendingOrders: new Set(orders), shownMs: null, byAbsence: 0, byRow: 0 };
			results.push(result);
			for (const orderId of orders) {
				if (!waiting.has(orderId)) waiting.set(orderId, []);
				waiting.get(orderId).push({ result, analyte: r.analyte, atMs: Date.parse(r.at) });
			}
		}
	}

	async function ask(orderIds) {
		const url = `${baseUrl}/api/v1/flags?order=${orderIds.join(',')}&limit=${ORDERS_PER_REQUEST}`;
		const t0 = performance.now();
		const response = await fetch(url, { headers: { cookie, accept: 'application/json' } });
		const body = await response.json();
		const seenAt = performance.now();
		requestMs.push(seenAt - t0);
		if (response.status !== 200) throw new Error(`freshness: the board API answered ${response.status}: ${JSON.stringify(body).slice(0, 300)}`);
		const rows = new Map(body.rows.map((row) => [row.order.id, row]));
		const listed = new Map((body.orders ?? []).map((o) => [o.id, o]));
		for (const orderId of orderIds) {
			const row = rows.get(orderId);
			const shown = row ?? listed.get(orderId);
			if (!shown) throw new Error(`freshness: the board API does not know order ${orderId}`);
			const list = waiting.get(orderId);
			if (!list) continue;
			const still = [];
			for (const item of list) {
				const basis = shown[item.analyte === 'creatinine' ? 'creatinineAt' : 'albuminAt'];
				if (basis === null || Date.parse(basis) < item.atMs) {
					still.push(item);
					continue;
				}
				const r = item.result;
				r.pendingOrders.delete(orderId);
				if (row) r.byRow++;
				else r.byAbsence++;
				if (r.pendingOrders.size === 0) r.shownMs = seenAt - r.t202;
			}
			if (still.length) waiting.set(orderId, still);
			else waiting.delete(orderId);
		}
	}

	async function loop() {
		while (!stopped) {
			const started = performance.now();
			const ids = [...waiting.keys()];
			if (ids.length > 0) {
				const batches = [];
				for (let i = 0; i < ids.length; i += ORDERS_PER_REQUEST) batches.push(ids.slice(i, i + ORDERS_PER_REQUEST));
				let next = 0;
				const client = async () => {
					while (next < batches.length) await ask(batches[next++]);
				};
				await Promise.all(Array.from({ length: Math.min(PROBE_CLIENTS, batches.length) }, client));
				cycleMs.push(performance.now() - started);
			}
			const rest = POLL_MS - (performance.now() - started);
			if (rest > 0) await sleep(rest);
		}
	}
	const running = loop().catch((error) => {
		failure = error;
	});

	return {
		add,
		get waiting() {
			return waiting.size;
		},
		get failure() {
			return failure;
		},
		async stop() {
			stopped = true;
			await running;
			if (failure) throw failure;
		},
		/** where a part starts: the report of a part covers its results and the probe's requests since */
		mark() {
			return { results: results.length, requests: requestMs.length, cycles: cycleMs.length };
		},
		/** results shown and not, and what the probe itself did, since `from` (a mark) */
		report(from) {
			const mine = results.slice(from.results);
			const shown = mine.filter((r) => r.shownMs !== null);
			const cycles = cycleMs.slice(from.cycles).sort((a, b) => a - b);
			const asked = requestMs.slice(from.requests).sort((a, b) => a - b);
			return {
				resultsProbed: mine.length,
				resultsShown: shown.length,
				resultsNotShown: mine.length - shown.length,
				shownAsFlagRow: shown.filter((r) => r.byAbsence === 0).length,
				shownAsNoFlag: shown.filter((r) => r.byRow === 0).length,
				...summary(shown.map((r) => r.shownMs)),
				probe: {
					requests: asked.length,
					requestP50Ms: round(percentile(asked, 50)),
					requestP95Ms: round(percentile(asked, 95)),
					pollCycleP50Ms: round(percentile(cycles, 50)),
					pollCycleP95Ms: round(percentile(cycles, 95))
				}
			};
		}
	};
}

async function post(baseUrl, token, body) {
	const response = await fetch(`${baseUrl}/api/v1/feed`, {
		method: 'POST',
		headers: { authorization: `Bearer ${token}`, 'content-type': 'application/fhir+json' },
		body
	});
	// the 202 is what a lab interface sees: the result is stored and its orders are queued
	const t202 = performance.now();
	const out = await response.json().catch(() => null);
	if (response.status !== 202 || out?.counts?.quarantined) throw new Error(`freshness: feed answered ${response.status}: ${JSON.stringify(out).slice(0, 300)}`);
	return t202;
}

async function settle(probe, label) {
	const until = performance.now() + SETTLE_MS;
	while (probe.waiting > 0 && performance.now() < until) {
		if (probe.failure) throw probe.failure;
		await sleep(100);
	}
	if (probe.waiting > 0) log(`   freshness ${label}: ${probe.waiting} orders still not showing their results after ${SETTLE_MS / 1000} s`);
}

/**
 * How many order.reassess jobs wait (created or retrying), read every 500 ms while a part runs: the
 * backlog a result waits behind before its order is re-assessed.
 */
function watchQueue(sql) {
	const counts = [];
	let stopped = false;
	const running = (async () => {
		while (!stopped) {
			const [{ n }] = await sql`select count(*)::int as n from pgboss.job where name = 'order.reassess' and state < 'active'`;
			counts.push(n);
			await sleep(500);
		}
	})();
	return async () => {
		stopped = true;
		await running;
		return { peakJobsWaiting: Math.max(0, ...counts), meanJobsWaiting: round(counts.reduce((a, b) => a + b, 0) / Math.max(1, counts.length)) };
	};
}

/** Waits until nothing is queued for re-assessment (between the two parts, so the steady part starts quiet). */
async function drained(sql) {
	for (let i = 0; i < 600; i++) {
		const [{ n }] = await sql`select count(*)::int as n from pgboss.job where name = 'order.reassess' and state < 'completed'`;
		if (n === 0) return;
		await sleep(200);
	}
	throw new Error('freshness: order.reassess jobs still waiting after 2 minutes');
}

/**
 * Runs both parts against the bench stack; `fixture.freshnessPath` is the file scripts/bench/fixture.ts
 * wrote (burst and steady bundles, each listing its results, and each patient's active orders).
 */
export async function freshness(stack, sql, fixture) {
	const data = JSON.parse(readFileSync(fixture.freshnessPath, 'utf8'));
	const cookie = await signIn(stack.baseUrl, 'pharmacist@larkspur.test', 'larkspur-demo-2026');
	const mrns = Object.keys(data.orders).sort();
	const step = Math.floor(mrns.length / BURST_PROBED_PATIENTS);
	const probedInBurst = new Set(mrns.filter((_, i) => i % step === 0).slice(0, BURST_PROBED_PATIENTS));
	const cpu0 = process.cpuUsage();
	const probe = createProbe(stack.baseUrl, cookie, data.orders);
	try {
		// (a) the burst
		const burstMark = probe.mark();
		const burstQueue = watchQueue(sql);
		const burstResults = data.burst.reduce((n, b) => n + b.results.length, 0);
		let next = 0;
		const t0 = performance.now();
		const sender = async () => {
			while (next < data.burst.length) {
				const b = data.burst[next++];
				const t202 = await post(stack.baseUrl, fixture.token, b.body);
				probe.add(
					b.results.filter((r) => probedInBurst.has(r.mrn)),
					t202
				);
				if (probe.failure) throw probe.failure;
			}
		};
		await Promise.all(Array.from({ length: BURST_SENDERS }, sender));
		const postedMs = performance.now() - t0;
		await settle(probe, 'burst');
		const burstJobs = await burstQueue();
		const burst = {
			results: burstResults,
			bundles: data.burst.length,
			senders: BURST_SENDERS,
			postedS: round(postedMs / 1000, 2),
			resultsPerSPosted: round(burstResults / (postedMs / 1000)),
			probedPatients: probedInBurst.size,
			...probe.report(burstMark),
			queue: burstJobs
		};
		log(`   burst: p50 ${burst.p50Ms} ms, p95 ${burst.p95Ms} ms, p99 ${burst.p99Ms} ms (${burst.resultsShown} of ${burst.resultsProbed} probed results shown)`);
		await drained(sql);
		await sleep(2000);

		// (b) the steady stream
		const steadyMark = probe.mark();
		const steadyQueue = watchQueue(sql);
		const steadyResults = data.steady.reduce((n, b) => n + b.results.length, 0);
		const s0 = performance.now();
		const inFlight = [];
		for (let i = 0; i < data.steady.length; i++) {
			const due = s0 + i * STEADY_EVERY_MS - performance.now();
			if (due > 0) await sleep(due);
			if (probe.failure) throw probe.failure;
			const b = data.steady[i];
			inFlight.push(post(stack.baseUrl, fixture.token, b.body).then((t202) => probe.add(b.results, t202)));
		}
		await Promise.all(inFlight);
		const steadyPostedMs = performance.now() - s0;
		await settle(probe, 'steady');
		const steadyJobs = await steadyQueue();
		const steady = {
			results: steadyResults,
			bundles: data.steady.length,
			bundleEveryMs: STEADY_EVERY_MS,
			postedS: round(steadyPostedMs / 1000, 2),
			resultsPerS: round(steadyResults / (steadyPostedMs / 1000), 1),
			...probe.report(steadyMark),
			queue: steadyJobs
		};
		log(`   steady: p50 ${steady.p50Ms} ms, p95 ${steady.p95Ms} ms, p99 ${steady.p99Ms} ms (${steady.resultsShown} of ${steady.resultsProbed} results shown)`);
		const cpu = process.cpuUsage(cpu0);
		return {
			method: `signed in as a pharmacist, GET /api/v1/flags?order=<up to ${ORDERS_PER_REQUEST} ids> (board cache on) for every order with a result waiting, every ${POLL_MS} ms or as soon as the previous poll cycle ended, ${PROBE_CLIENTS} requests at a time; a result is shown when every active order of its patient shows, as its flag row or as "no open flag" beside its newest assessment, an assessment that used it or a newer result of the same test; latency from the 202 to the answer that shows it, so the resolution is one poll cycle`,
			pollMs: POLL_MS,
			benchScriptCpuS: round((cpu.user + cpu.system) / 1e6, 1),
			burst,
			steady
		};
	} finally {
		await probe.stop().catch(() => {});
	}
}

/** The bench table's rows for this stage: [measure, result, details, target]. */
export function freshnessRows(f, targets, ok) {
	const latency = (p) => `p50 ${p.p50Ms} ms, p95 ${p.p95Ms} ms, p99 ${p.p99Ms} ms`;
	const notShown = (p) => (p.resultsNotShown ? `; ${p.resultsNotShown} NOT SHOWN within ${SETTLE_MS / 1000} s` : '');
	const met = (p, target) => ok(p.resultsNotShown === 0 && p.p95Ms <= target);
	return [
		[
			'freshness, burst',
			latency(f.burst),
			`${f.burst.results.toLocaleString('en')} results in ${f.burst.postedS} s (${f.burst.resultsPerSPosted.toLocaleString('en')}/s posted); ${f.burst.resultsShown.toLocaleString('en')} results of ${f.burst.probedPatients} patients probed, max ${f.burst.maxMs} ms; up to ${f.burst.queue.peakJobsWaiting.toLocaleString('en')} order.reassess jobs waiting${notShown(f.burst)}`,
			`p95 ≤ ${targets.freshnessBurstP95Ms} ms: ${met(f.burst, targets.freshnessBurstP95Ms)}`
		],
		[
			'freshness, steady',
			latency(f.steady),
			`${f.steady.results.toLocaleString('en')} results at ${f.steady.resultsPerS}/s (a bundle every ${f.steady.bundleEveryMs} ms); all probed, max ${f.steady.maxMs} ms; up to ${f.steady.queue.peakJobsWaiting} jobs waiting${notShown(f.steady)}`,
			`p95 ≤ ${targets.freshnessSteadyP95Ms} ms: ${met(f.steady, targets.freshnessSteadyP95Ms)}`
		],
		[
			'  the probe',
			`each waiting order every ${f.pollMs} ms`,
			`a poll cycle's requests took p50 ${f.burst.probe.pollCycleP50Ms} / ${f.steady.probe.pollCycleP50Ms} ms, p95 ${f.burst.probe.pollCycleP95Ms} / ${f.steady.probe.pollCycleP95Ms} ms (burst / steady; a longer cycle delays the next); ${f.burst.probe.requests + f.steady.probe.requests} requests of ≤ 200 orders; bench script ${f.benchScriptCpuS} CPU-s`,
			''
		]
	];
}
