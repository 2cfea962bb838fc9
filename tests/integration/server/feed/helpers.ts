// Shared set-up for the feed's integration tests: the agent library, fixture files, the queue drained
// through the real order.reassess handler, and a fingerprint of the clinical tables.
import { readFileSync } from 'node:fs';
import { sql } from 'drizzle-orm';
import { orderReassess } from '../../../../jobs/order-reassess';
import { seedAgents } from '../../../../src/lib/server/demo';
import { getDb } from '../../../../src/lib/server/db';
import { parseCsvText, type CsvKind, bundleSchema, ingestBundle, ingestCsvRows, type IngestContext } from '../../../../src/lib/server/feed';
import { getBoss, QUEUES } from '../../../../src/lib/server/queue';
import type { ReassessJob } from '../../../../src/lib/server/reassess';

export const root = new URL('../../../../', import.meta.url);
export const fixture = (path: string) => readFileSync(new URL(path, root), 'utf8');
export const system: IngestContext['actor'] = { actorId: null, actorLabel: 'test', requestId: null };

export async function withAgents() {
	await seedAgents();
}

export async function ingestFixtureBundle(path: string, ctx: Partial<IngestContext> = {}) {
	const text = fixture(path);
	return ingestText(text, ctx);
}

export async function ingestText(text: string, ctx: Partial<IngestContext> = {}) {
	const envelope = bundleSchema.parse(JSON.parse(text));
	return ingestBundle(text, envelope, { source: 'fhir', actor: system, ...ctx });
}

export async function ingestFixtureCsv(kind: CsvKind, path: string, ctx: Partial<IngestContext> = {}) {
	const { header, rows } = parseCsvText(fixture(path));
	return ingestCsvRows(kind, header, rows, { source: 'csv', actor: system, ...ctx });
}

/** Runs every queued order.reassess job through the real handler, as the worker would. */
export async function drainReassess(): Promise<number> {
	const boss = await getBoss();
	let total = 0;
	for (;;) {
		const jobs = await boss.fetch<ReassessJob>(QUEUES.orderReassess, { batchSize: 250 });
		if (jobs.length === 0) return total;
		await orderReassess.handler(jobs, boss);
		await boss.complete(
			QUEUES.orderReassess,
			jobs.map((j) => j.id)
		);
		total += jobs.length;
	}
}

export async function queuedOrderIds(): Promise<string[]> {
	const [exists] = Array.from((await getDb().execute(sql`select to_regclass('pgboss.job') is not null as ok`)) as unknown as { ok: boolean }[]);
	if (!exists.ok) return [];
	const rows = await getDb().execute(
		sql`select singleton_key from pgboss.job where name = ${QUEUES.orderReassess} and state = 'created' order by singleton_key`
	);
	return Array.from(rows as unknown as { singleton_key: string }[]).map((r) => r.singleton_key);
}

/** Every row of the clinical tables (ids and values), to prove that a rejected message changed nothing. */
export async function clinicalFingerprint(): Promise<string> {
	const tables = ['patients', 'encounters', 'orders', 'lab_results', 'body_measurements', 'assessments'];
	const parts: string[] = [];
	for (const table of tables) {
		const rows = await getDb().execute(sql.raw(`select md5(coalesce(string_agg(t::text, '|' order by t::text), '')) as h, count(*) as n from ${table} t`));
		const [row] = Array.from(rows as unknown as { h: string; n: string }[]);
		parts.push(`${table}:${row.n}:${row.h}`);
	}
	return parts.join(' ');
}

export async function tableCount(table: string): Promise<number> {
	const rows = await getDb().execute(sql.raw(`select count(*)::int as n from ${table}`));
	return Array.from(rows as unknown as { n: number }[])[0].n;
}

/** Every row of a table as a set of hashes: rows stored before a message must all be there after it. */
export async function rowHashes(): Promise<Record<string, Set<string>>> {
	const out: Record<string, Set<string>> = {};
	for (const table of [
		'patients',
		'encounters',
		'orders',
		'lab_results',
		'body_measurements',
		'drug_levels',
		'medication_administrations',
		'assessments',
		'agents'
	]) {
		const rows = await getDb().execute(sql.raw(`select md5(t::text) as h from ${table} t`));
		out[table] = new Set(Array.from(rows as unknown as { h: string }[]).map((r) => r.h));
	}
	return out;
}

/** A minimal RequestEvent for calling a route handler directly. */
export function event(request: Request, locals: Partial<App.Locals>, params: Record<string, string> = {}) {
	return {
		request,
		locals: { requestId: 'test-request', user: null, sessionId: null, feedToken: null, ...locals } as App.Locals,
		params,
		url: new URL(request.url),
		route: { id: null }
	} as never;
}
