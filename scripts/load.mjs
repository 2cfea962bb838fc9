// `npm run load`: 50 concurrent signed-in sessions on the triage board for 60 s. Each session is a real
// sign-in of its own pharmacist account; each connection loads the board page and then pages through
// the board's API as the page's script does. Prints request counts and p50/p95/p99, checks that no
// request got a 5xx answer (exit 1 when any did). Starts and stops its own stack (scripts/lib/stack.mjs).
import path from 'node:path';
import { signIn, withStack } from './lib/stack.mjs';
import { log, root } from './lib/system.mjs';
import { readFileSync, writeFileSync } from 'node:fs';

const SESSIONS = Number(process.env.EBBLINE_LOAD_SESSIONS ?? 50);
const DURATION_S = Number(process.env.EBBLINE_LOAD_SECONDS ?? 60);

const round = (n, d = 1) => Math.round(n * 10 ** d) / 10 ** d;
function percentile(sorted, p) {
	if (sorted.length === 0) return null;
	return sorted[Math.min(sorted.length - 1, Math.max(0, Math.ceil((p / 100) * sorted.length) - 1))];
}

async function main() {
	const summary = await withStack('load', async (stack) => {
		stack.migrate();
		log(`fixture: the Larkspur Bay demo and ${SESSIONS} pharmacist accounts`);
		const { users } = stack.fixture('load', SESSIONS);
		await stack.startApp();
		log(`${SESSIONS} sign-ins`);
		const cookies = await Promise.all(users.map((u) => signIn(stack.baseUrl, u.email, u.password)));
		if (new Set(cookies).size !== SESSIONS) throw new Error('two sign-ins got the same session');

		const { default: autocannon } = await import('autocannon');
		const byPath = new Map();
		const statuses = {};
		let nextSession = 0;
		const paths = ['/board', '/api/v1/flags', '/api/v1/flags?sort=age', '/api/v1/flags?severity=high,moderate', '/api/v1/flags?state=all&sort=patient'];
		// every connection is one session: it takes the next cookie on its first request and keeps it
		const withSession = (p) => ({
			method: 'GET',
			path: p,
			setupRequest: (req, context) => {
				context.cookie ??= cookies[nextSession++ % SESSIONS];
				return { ...req, headers: { ...req.headers, cookie: context.cookie, accept: p.startsWith('/api') ? 'application/json' : 'text/html' } };
			}
		});
		log(`${SESSIONS} sessions for ${DURATION_S} s: ${paths.join(', ')}`);
		const instance = autocannon({
			url: stack.baseUrl,
			connections: SESSIONS,
			duration: DURATION_S,
			requests: paths.map(withSession),
			timeout: 30
		});
		const latencies = [];
		instance.on('response', (client, status, _bytes, ms) => {
			statuses[status] = (statuses[status] ?? 0) + 1;
			latencies.push(ms);
			const p = client.requestIterator?.currentRequest?.path ?? 'unknown';
			const bucket = byPath.get(p) ?? [];
			bucket.push(ms);
			byPath.set(p, bucket);
		});
		const result = await instance;
		latencies.sort((a, b) => a - b);
		const fiveXx = Object.entries(statuses)
			.filter(([s]) => Number(s) >= 500)
			.reduce((n, [, c]) => n + c, 0);
		return {
			sessions: SESSIONS,
			durationS: DURATION_S,
			requests: latencies.length,
			requestsPerS: round(result.requests.average),
			errors: result.errors,
			timeouts: result.timeouts,
			statuses,
			fiveXx,
			p50Ms: round(percentile(latencies, 50)),
			p95Ms: round(percentile(latencies, 95)),
			p99Ms: round(percentile(latencies, 99)),
			maxMs: round(latencies[latencies.length - 1] ?? 0),
			byPath: Object.fromEntries(
				[...byPath].map(([p, list]) => {
					list.sort((a, b) => a - b);
					return [p, { requests: list.length, p50Ms: round(percentile(list, 50)), p95Ms: round(percentile(list, 95)), p99Ms: round(percentile(list, 99)) }];
				})
			)
		};
	});
	summary.date = new Date().toISOString();
	const file = path.join(root, 'bench/results.json');
	try {
		const all = JSON.parse(readFileSync(file, 'utf8'));
		all.load = summary;
		writeFileSync(file, `${JSON.stringify(all, null, '\t')}\n`);
	} catch {
		// no bench results yet: the load figures are printed only
	}
	console.log(`\nload: ${summary.sessions} signed-in sessions for ${summary.durationS} s`);
	console.log(
		`requests ${summary.requests.toLocaleString('en')} (${summary.requestsPerS} per s), statuses ${JSON.stringify(summary.statuses)}, errors ${summary.errors}, timeouts ${summary.timeouts}`
	);
	console.log(`latency p50 ${summary.p50Ms} ms, p95 ${summary.p95Ms} ms, p99 ${summary.p99Ms} ms, max ${summary.maxMs} ms`);
	for (const [p, s] of Object.entries(summary.byPath))
		console.log(`  ${p.padEnd(40)} ${String(s.requests).padStart(7)} requests  p50 ${s.p50Ms} ms  p95 ${s.p95Ms} ms  p99 ${s.p99Ms} ms`);
	console.log(
		summary.fiveXx === 0 && summary.errors === 0 ? 'zero 5xx: passed' : `FAILED: ${summary.fiveXx} answers with 5xx, ${summary.errors} connection errors`
	);
	if (summary.fiveXx > 0 || summary.errors > 0) process.exitCode = 1;
}

main().catch((error) => {
	console.error(`[ebbline] load failed: ${error.stack ?? error.message}`);
	process.exitCode = 1;
});
