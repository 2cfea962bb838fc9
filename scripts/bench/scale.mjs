// The scale stage of `npm run bench` (`--only=scale`): a hospital network's year, and what it costs
// the pages people use every day. On a database of its own:
//
//   1. the template: 30 days of the invented Larkspur Bay Hospital (120 beds) played through the feed,
//      the rules and the team's work by the demo history generator (scripts/bench/scale-template.ts);
//   2. the network, in bulk: the template copied set-based (INSERT … SELECT, one statement per table
//      per step) as further hospitals of the network and as earlier months, every id remapped
//      (md5(id ‖ copy)), every time shifted by whole months, every unique source id suffixed; earlier
//      months end closed (flags closed, orders stopped, patients discharged, unanswered advice withdrawn);
//   3. measured at 1, 3 and 12 months of history in the same run: the board API (20 clients), a long
//      stay's patient page data, the stewardship report over the whole period with its CSV exports, a
//      back-test of one changed rule over 90 days, the audit log filtered by action, and the database's
//      size; then the 12-month / 1-month growth of each.
import { spawnSync } from 'node:child_process';
import { bin, signIn } from '../lib/stack.mjs';
import { root } from '../lib/system.mjs';

export const SCALE_TARGETS = { boardP95Ms: 50, boardGrowth: 1.5, patientP95Ms: 150, reportS: 2, backTestS: 10, auditP95Ms: 200 };
const DAY_MS = 86_400_000;
const MONTH_DAYS = 30;
const PASSWORD = 'larkspur-demo-2026';
const round = (n, d = 0) => Math.round(n * 10 ** d) / 10 ** d;

/** Tables copied from the template, parents before children. */
const COPIED = [
	'patients',
	'encounters',
	'feed_messages',
	'lab_results',
	'body_measurements',
	'renal_replacement_events',
	'orders',
	'medication_administrations',
	'drug_levels',
	'assessments',
	'flags',
	'flag_findings',
	'flag_events',
	'recommendations',
	'notifications',
	'outbound_emails',
	'audit_log'
];

/** How an earlier month ends: everything that was still open at its end is closed then. */
const CLOSED_AT_MONTH_END = {
	flags: {
		state: () => `case when t.state <> 'closed' then 'closed'::flag_state else t.state end`,
		outcome: () => `case when t.state <> 'closed' then 'superseded'::outcome else t.outcome end`,
		closed_at: () => `coalesce(t.closed_at - c.shift, c.month_end)`,
		snoozed_until: () => `null`,
		snooze_until_next_result: () => `false`
	},
	orders: {
		status: () => `'stopped'::order_status`,
		stopped_at: () => `coalesce(t.stopped_at - c.shift, c.month_end)`
	},
	encounters: { discharged_at: () => `coalesce(t.discharged_at - c.shift, c.month_end)` },
	recommendations: {
		status: () => `case when t.status = 'sent' then 'withdrawn'::recommendation_status else t.status end`,
		withdrawn_at: () => `case when t.status = 'sent' then c.month_end else t.withdrawn_at - c.shift end`,
		withdrawn_reason: () => `case when t.status = 'sent' then 'The order ended.' else t.withdrawn_reason end`
	},
	notifications: { read_at: () => `coalesce(t.read_at - c.shift, c.month_end)` }
};

function percentile(sorted, p) {
	if (sorted.length === 0) return null;
	return sorted[Math.min(sorted.length - 1, Math.max(0, Math.ceil((p / 100) * sorted.length) - 1))];
}

/** The template: 30 days of Larkspur Bay through the real pipeline. */
function playTemplate(stack, now) {
	const result = spawnSync(bin('tsx'), ['scripts/bench/scale-template.ts', '--days', String(MONTH_DAYS), '--now', now.toISOString()], {
		cwd: root,
		env: stack.env,
		encoding: 'utf8',
		maxBuffer: 64 * 1024 * 1024
	});
	const line = (result.stdout ?? '').split('\n').find((l) => l.startsWith('TEMPLATE '));
	if (result.status !== 0 || !line) {
		process.stderr.write(result.stderr ?? '');
		throw new Error(`the scale template failed (exit ${result.status ?? result.signal})`);
	}
	return JSON.parse(line.slice('TEMPLATE '.length));
}

/** What to select for each column of a copied table: remapped ids, shifted times, suffixed unique keys. */
async function columnPlans(sql) {
	const columns = await sql`
		select c.table_name, c.column_name, c.data_type, c.udt_name, c.column_default
		from information_schema.columns c
		where c.table_schema = 'public' and c.table_name = any(${COPIED})
		order by c.table_name, c.ordinal_position`;
	const foreign = await sql`
		select cl.relname as table_name, a.attname as column_name, ref.relname as target
		from pg_constraint k
		join pg_class cl on cl.oid = k.conrelid join pg_namespace n on n.oid = cl.relnamespace
		join pg_class ref on ref.oid = k.confrelid
		join pg_attribute a on a.attrelid = k.conrelid and a.attnum = k.conkey[1]
		where k.contype = 'f' and n.nspname = 'public' and array_length(k.conkey, 1) = 1`;
	const unique = await sql`
		select cl.relname as table_name, a.attname as column_name
		from pg_index i join pg_class cl on cl.oid = i.indrelid join pg_namespace n on n.oid = cl.relnamespace
		join pg_attribute a on a.attrelid = i.indrelid and a.attnum = i.indkey[0]
		where n.nspname = 'public' and i.indisunique and not i.indisprimary and i.indnatts = 1 and i.indpred is null`;
	const refs = new Map(foreign.map((f) => [`${f.table_name}.${f.column_name}`, f.target]));
	const uniques = new Set(unique.map((u) => `${u.table_name}.${u.column_name}`));
	const plans = new Map();
	for (const table of COPIED) {
		const list = [];
		for (const col of columns.filter((c) => c.table_name === table)) {
			const name = col.column_name;
			const key = `${table}.${name}`;
			const t = `t."${name}"`;
			if (name === 'id' && col.data_type === 'bigint') continue; // a bigserial: the copy gets its own
			let expr = t;
			if (col.udt_name === 'uuid' && (name === 'id' || COPIED.includes(refs.get(key)))) expr = `md5(${t}::text || c.key)::uuid`;
			else if (col.data_type === 'timestamp with time zone') expr = `${t} - c.shift`;
			else if (col.data_type === 'text' && uniques.has(key)) expr = `${t} || '~' || c.key`;
			else if (table === 'encounters' && name === 'ward') expr = `case when c.site = 1 then ${t} else ${t} || ' · site ' || c.site end`;
			else if (table === 'audit_log' && name === 'object_id')
				expr = `case when ${t} ~ '^[0-9a-f-]{36}$' and t.object_type in ('flag', 'recommendation', 'order', 'patient', 'feed_message') then md5(${t} || c.key)::uuid::text else ${t} end`;
			const closing = CLOSED_AT_MONTH_END[table]?.[name];
			list.push({ name, expr, closing: closing ? closing() : null });
		}
		plans.set(table, list);
	}
	return plans;
}

/** Copies the template once per (month, site) in `copies`, one statement per table. */
async function copyTemplate(sql, plans, copies, templateNow) {
	const values = copies.map((c) => `('m${c.month}s${c.site}', interval '${c.month * MONTH_DAYS} days', ${c.month}, ${c.site})`).join(', ');
	const counts = {};
	await sql.begin(async (tx) => {
		await tx`set local synchronous_commit = off`;
		for (const table of COPIED) {
			const list = plans.get(table);
			const select = list.map((p) => (p.closing ? `case when c.month > 0 then ${p.closing} else ${p.expr} end` : p.expr)).join(', ');
			const statement = `insert into public."${table}" (${list.map((p) => `"${p.name}"`).join(', ')})
				select ${select}
				from template."${table}" t
				cross join (select v.*, '${templateNow.toISOString()}'::timestamptz - v.shift as month_end from (values ${values}) as v(key, shift, month, site)) c`;
			const result = await tx.unsafe(statement);
			counts[table] = result.count;
		}
	});
	return counts;
}

async function hammer(url, cookie, { connections, durationS }) {
	const { default: autocannon } = await import('autocannon');
	const latencies = [];
	const statuses = {};
	const instance = autocannon({ url, connections, duration: durationS, headers: { cookie, accept: 'application/json' } });
	instance.on('response', (_client, status, _bytes, ms) => {
		statuses[status] = (statuses[status] ?? 0) + 1;
		latencies.push(ms);
	});
	await instance;
	latencies.sort((a, b) => a - b);
	return {
		connections,
		durationS,
		requests: latencies.length,
		statuses,
		p50Ms: round(percentile(latencies, 50), 1),
		p95Ms: round(percentile(latencies, 95), 1),
		p99Ms: round(percentile(latencies, 99), 1)
	};
}

async function timed(fn) {
	const t0 = performance.now();
	const value = await fn();
	return { ms: performance.now() - t0, value };
}

async function getOk(url, cookie) {
	const response = await fetch(url, { headers: { cookie } });
	const body = await response.text();
	if (!response.ok) throw new Error(`GET ${url}: HTTP ${response.status}`);
	return body;
}

/** The back-test of one changed threshold over 90 days, as the rules page runs it (streamed NDJSON). */
async function backTest(baseUrl, cookie, versionId) {
	const response = await fetch(`${baseUrl}/api/v1/admin/rules/backtest`, {
		method: 'POST',
		headers: { cookie, 'content-type': 'application/json', origin: baseUrl },
		body: JSON.stringify({ versionId, days: 90 })
	});
	const text = await response.text();
	const result = text
		.split('\n')
		.filter(Boolean)
		.map((l) => JSON.parse(l))
		.find((l) => l.type === 'result' || l.type === 'error');
	if (!response.ok || result?.type !== 'result') throw new Error(`back-test: HTTP ${response.status} ${result?.message ?? ''}`);
	return result.result;
}

async function measure(stack, sql, cookies, context) {
	const { baseUrl } = stack;
	const [{ bytes }] = await sql`select pg_database_size(current_database())::float8 as bytes`;
	const [counts] = await sql`select
		(select count(*)::int from lab_results) + (select count(*)::int from body_measurements) as results,
		(select count(*)::int from orders) as orders, (select count(*)::int from flags) as flags,
		(select count(*)::int from flags where state <> 'closed') as open_flags,
		(select count(*)::int from flag_events) as flag_events, (select count(*)::int from recommendations) as recommendations,
		(select count(*)::int from audit_log) as audit_rows, (select count(*)::int from assessments) as assessments,
		(select count(*)::int from patients) as patients`;
	const board = await hammer(`${baseUrl}/api/v1/flags`, cookies.pharmacist, { connections: 20, durationS: 10 });
	// the same API from a second app process with the board cache off and no workers: the query itself
	const boardUncached = await hammer(`${context.uncached.baseUrl}/api/v1/flags`, cookies.uncached, { connections: 4, durationS: 6 });
	const patient = await hammer(`${baseUrl}/patients/${context.longStayPatientId}/__data.json`, cookies.pharmacist, { connections: 4, durationS: 8 });
	const from = new Date(context.now.getTime() - context.months * MONTH_DAYS * DAY_MS).toISOString().slice(0, 10);
	const to = context.now.toISOString().slice(0, 10);
	const query = `from=${from}&to=${to}`;
	const reportRuns = [];
	for (let i = 0; i < 3; i++) reportRuns.push((await timed(() => getOk(`${baseUrl}/reports/__data.json?${query}`, cookies.admin))).ms);
	reportRuns.sort((a, b) => a - b);
	const exports = {};
	for (const table of context.reportTables) exports[table] = round((await timed(() => getOk(`${baseUrl}/reports/export/${table}?${query}`, cookies.admin))).ms);
	const back = await timed(() => backTest(baseUrl, cookies.admin, context.draftVersionId));
	const audit = await hammer(`${baseUrl}/admin/audit/__data.json?action=flag.closed`, cookies.admin, { connections: 4, durationS: 6 });
	return {
		months: context.months,
		rows: counts,
		databaseMiB: round(bytes / 1024 / 1024),
		databaseMiBPerMonth: round(bytes / 1024 / 1024 / context.months, 1),
		board,
		boardUncached,
		patient,
		report: { from, to, medianS: round(reportRuns[1] / 1000, 2), runsS: reportRuns.map((ms) => round(ms / 1000, 2)) },
		reportExportsMs: exports,
		backTest: { days: 90, totalS: round(back.ms / 1000, 2), handlerS: back.value?.ms ? round(back.value.ms / 1000, 2) : null, orders: back.value?.history?.draftOrders ?? null },
		audit
	};
}

/**
 * Runs the scale stage on `stack` (a bench stack on a fresh database, app not yet started). `sites`
 * Larkspur-sized hospitals make the network (120 beds each); `log` prints progress.
 */
export async function scaleStage(stack, { sites, log }) {
	const now = new Date();
	log(`scale: template, ${MONTH_DAYS} days of one 120-bed hospital through the pipeline`);
	const template = await timed(async () => playTemplate(stack, now));
	log(`   ${template.value.stays} stays, ${template.value.results} results, ${template.value.recommendations} recommendations in ${round(template.ms / 1000)} s`);
	await stack.startApp();
	const { default: postgres } = await import('postgres');
	const sql = postgres(stack.databaseUrl, { max: 2, onnotice: () => {} });
	try {
		// the template stays aside, unchanged, for every copy
		await sql`create schema template`;
		for (const table of COPIED) await sql.unsafe(`create table template."${table}" as select * from public."${table}"`);
		const plans = await columnPlans(sql);
		const [patient] = await sql`
			select p.id from patients p join encounters e on e.patient_id = p.id and e.discharged_at is null
			order by (select count(*) from lab_results r where r.patient_id = p.id) desc, p.source_id limit 1`;
		const [draft] = await sql`
			insert into rule_versions (version, status, rules, note, based_on)
			select (select max(version) + 1 from rule_versions), 'draft',
				(select jsonb_agg(case when r->>'key' = 'dose-above-band' then jsonb_set(r, '{params,bandTolerance}', '0.1'::jsonb) else r end order by o)
					from jsonb_array_elements(a.rules) with ordinality as x(r, o)),
				'bench: one changed threshold', a.id
			from rule_versions a where a.status = 'active'
			returning id`;
		const uncached = await stack.startAnotherApp({ EBBLINE_BOARD_CACHE: 'off', EBBLINE_WORKERS: 'off' });
		const cookies = {
			pharmacist: await signIn(stack.baseUrl, 'pharmacist@larkspur.test', PASSWORD),
			admin: await signIn(stack.baseUrl, 'admin@larkspur.test', PASSWORD),
			uncached: await signIn(uncached.baseUrl, 'pharmacist@larkspur.test', PASSWORD)
		};
		const reportTables = ['flags-by-severity', 'findings-by-rule', 'recommendations', 'time-to-action', 'agents-flagged', 'dot-by-agent', 'dot-by-class'];
		const checkpoints = [];
		let built = 0;
		let buildS = 0;
		for (const months of [1, 3, 12]) {
			const copies = [];
			for (let month = built; month < months; month++) for (let site = 1; site <= sites; site++) if (month > 0 || site > 1) copies.push({ month, site });
			const copy = await timed(() => copyTemplate(sql, plans, copies, now));
			// vacuumed and analysed as autovacuum would leave it, so its work does not fall into the measurements
			const analyse = await timed(() => sql`vacuum (analyze)`);
			buildS += (copy.ms + analyse.ms) / 1000;
			built = months;
			log(`   ${months} month(s): ${copies.length} copies in ${round(copy.ms / 1000, 1)} s (+ vacuum and analyze ${round(analyse.ms / 1000, 1)} s); measuring`);
			const m = await measure(stack, sql, cookies, { now, months, longStayPatientId: patient.id, draftVersionId: draft.id, reportTables, uncached });
			m.buildS = round(copy.ms / 1000, 1);
			checkpoints.push(m);
			log(
				`   board p95 ${m.board.p95Ms} ms, patient p95 ${m.patient.p95Ms} ms, report ${m.report.medianS} s, back-test ${m.backTest.totalS} s, audit p95 ${m.audit.p95Ms} ms, ${m.databaseMiB} MiB`
			);
		}
		const first = checkpoints[0];
		const last = checkpoints[checkpoints.length - 1];
		const growth = (f) => (f(first) ? round(f(last) / f(first), 2) : null);
		return {
			network: { sites, beds: sites * 120, months: 12 },
			template: { days: MONTH_DAYS, seconds: round(template.ms / 1000, 1), ...template.value },
			bulkBuildS: round(buildS, 1),
			checkpoints,
			growth12to1: {
				boardP95: growth((c) => c.board.p95Ms),
				boardUncachedP95: growth((c) => c.boardUncached.p95Ms),
				patientP95: growth((c) => c.patient.p95Ms),
				report: growth((c) => c.report.medianS),
				backTest: growth((c) => c.backTest.totalS),
				auditP95: growth((c) => c.audit.p95Ms),
				databaseSize: growth((c) => c.databaseMiB)
			},
			targets: {
				board: last.board.p95Ms <= SCALE_TARGETS.boardP95Ms,
				boardGrowth: growth((c) => c.board.p95Ms) <= SCALE_TARGETS.boardGrowth,
				patient: last.patient.p95Ms <= SCALE_TARGETS.patientP95Ms,
				report: last.report.medianS <= SCALE_TARGETS.reportS,
				backTest: last.backTest.totalS <= SCALE_TARGETS.backTestS,
				audit: last.audit.p95Ms <= SCALE_TARGETS.auditP95Ms
			}
		};
	} finally {
		await sql.end({ timeout: 5 });
	}
}
