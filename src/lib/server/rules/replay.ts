// Replay and back-test. Replay re-evaluates every active order's latest assessment against the active
// rule set (after a publish or an agent edit), in batches of set-based statements. Back-test replays a
// draft over the last N days of stored assessments without writing anything, and says per rule what it
// would add and remove compared with the published set.
import { sql } from 'drizzle-orm';
import type { AgentParams } from '../../clinical/types';
import { evaluateRules } from '../../rules/evaluate';
import { buildFacts, type AssessmentLike } from '../../rules/facts';
import type { RuleDefinition } from '../../rules/types';
import { config } from '../config';
import { getDb, type Database, type DbOrTx } from '../db';
import { basisOf, supersedeFlagsOfStoppedOrders, syncFlags, type Candidate, type RuleCounts, type SyncResult } from '../flags';
import { getActiveRuleSet, type RuleSetRef } from './rule-sets';

const rows = <T>(result: unknown) => Array.from(result as Iterable<T>);
const toDate = (v: unknown) => (v instanceof Date ? v : new Date(v as string));
const FIRST_UUID = '00000000-0000-0000-0000-000000000000';

export const REPLAY_BATCH = 1000;

type Agent = { id: string; code: string; name: string; agent_class: string; params: AgentParams };

type AssessmentRow = {
	order_id: string;
	patient_id: string;
	status: 'active' | 'stopped';
	dose_mg: number;
	interval_h: number;
	infusion_h: number;
	route: string;
	start_at: Date;
	agent_id: string;
	assessment_id: string;
	at: Date;
	result: AssessmentLike;
	stable_step: { key: string; inputs: { name: string; value: unknown; unit: string }[] } | null;
};

async function loadAgents(db: DbOrTx): Promise<Map<string, Agent>> {
	const list = rows<Agent>(await db.execute(sql`select id, code, name, agent_class, params from agents`));
	return new Map(list.map((a) => [a.id, a]));
}

/** Facts of a stored assessment with the agent as it is in the library now. */
function toCandidate(row: AssessmentRow, agents: Map<string, Agent>): Candidate | null {
	const agent = agents.get(row.agent_id);
	if (!agent) return null;
	const assessment: AssessmentLike = { ...row.result, at: toDate(row.at), trace: row.stable_step ? [row.stable_step as never] : undefined };
	return {
		orderId: row.order_id,
		patientId: row.patient_id,
		assessmentId: row.assessment_id,
		assessmentAt: toDate(row.at),
		basisAt: basisOf(assessment),
		orderActive: row.status === 'active',
		facts: buildFacts({
			assessment,
			agent: { code: agent.code, name: agent.name, agentClass: agent.agent_class, params: agent.params },
			// the infusion time tells an extended infusion from an under-dose
			order: { doseMg: row.dose_mg, intervalH: row.interval_h, infusionH: row.infusion_h, route: row.route, startAt: toDate(row.start_at) }
		})
	};
}

// Only the trace step the facts need (the largest 48-h creatinine fall) is read, not the whole trace,
// and only when the stored result does not carry the value itself.
const STABLE_STEP = sql.raw(
	`case when a.result->'creatinine' ? 'fallWithin48hMgDl' then null else jsonb_path_query_first(a.trace, '$[*] ? (@.key == "creatinineStable")') end`
);

/** Active orders with their latest assessment, in id order, one batch at a time. */
async function* activeOrderBatches(db: DbOrTx, options: { agentId?: string; batchSize: number }) {
	const agents = await loadAgents(db);
	const agentFilter = options.agentId ? sql`and o.agent_id = ${options.agentId}::uuid` : sql``;
	let cursor = FIRST_UUID;
	for (;;) {
		const batch = rows<AssessmentRow>(
			await db.execute(sql`
				select o.id as order_id, o.patient_id, o.status, o.dose_mg, o.interval_h, o.infusion_h, o.route, o.start_at, o.agent_id,
					a.id as assessment_id, a.at, a.result, ${STABLE_STEP} as stable_step
				from orders o
				join lateral (
					select a.id, a.at, a.result, a.trace from assessments a where a.order_id = o.id order by a.at desc, a.created_at desc limit 1
				) a on true
				where o.status = 'active' and o.id > ${cursor}::uuid ${agentFilter}
				order by o.id
				limit ${options.batchSize}`)
		);
		if (batch.length === 0) return;
		cursor = batch[batch.length - 1].order_id;
		const candidates: Candidate[] = [];
		for (const row of batch) {
			const c = toCandidate(row, agents);
			if (c) candidates.push(c);
		}
		yield { candidates, scanned: batch.length };
	}
}

async function countActiveOrders(db: DbOrTx, agentId?: string): Promise<number> {
	const filter = agentId ? sql`and agent_id = ${agentId}::uuid` : sql``;
	const [row] = rows<{ n: number }>(await db.execute(sql`select count(*)::int as n from orders where status = 'active' ${filter}`));
	return row.n;
}

function merge(into: SyncResult, add: SyncResult) {
	for (const [key, counts] of Object.entries(add.byRule)) {
		const target = (into.byRule[key] ??= { opened: 0, refreshed: 0, superseded: 0, woke: 0 });
		for (const k of Object.keys(counts) as (keyof RuleCounts)[]) target[k] += counts[k];
	}
	for (const k of Object.keys(add.totals) as (keyof RuleCounts)[]) into.totals[k] += add.totals[k];
}

export type Progress = { phase: 'history' | 'now' | 'replay'; done: number; total: number };

export type ReplayResult = SyncResult & { ruleVersion: number; orders: number; stoppedSuperseded: number; ms: number };

/**
 * Re-evaluates every active order's latest assessment (or only those of one agent) against the active
 * rule set, one transaction per batch, then supersedes the open flags of stopped orders.
 */
export async function replayActiveOrders(
	options: { agentId?: string; batchSize?: number; db?: Database; now?: Date; onProgress?: (p: Progress) => void } = {}
): Promise<ReplayResult> {
	const started = performance.now();
	const db = options.db ?? getDb();
	const ruleSet = await getActiveRuleSet(db);
	const total = await countActiveOrders(db, options.agentId);
	const result: SyncResult = { byRule: {}, totals: { opened: 0, refreshed: 0, superseded: 0, woke: 0 } };
	let done = 0;
	// the next batch is read while the current one is written (the database and this process overlap)
	const batches = activeOrderBatches(db, { agentId: options.agentId, batchSize: options.batchSize ?? REPLAY_BATCH });
	let next = batches.next();
	for (;;) {
		const current = await next;
		if (current.done) break;
		next = batches.next();
		// if the write below fails, the read ahead must not end as an unhandled rejection
		next.catch(() => {});
		const { candidates, scanned } = current.value;
		merge(result, await db.transaction((tx) => syncFlags(tx, ruleSet, candidates, { now: options.now })));
		done += scanned;
		options.onProgress?.({ phase: 'replay', done, total });
	}
	const stoppedSuperseded = await db.transaction((tx) => supersedeFlagsOfStoppedOrders(tx, undefined, options.now));
	return { ...result, ruleVersion: ruleSet.version, orders: done, stoppedSuperseded, ms: Math.round(performance.now() - started) };
}

export type HistoryCounts = {
	/** orders the draft flags on at least one day */
	draftOrders: number;
	/** orders the published set flags on at least one day */
	publishedOrders: number;
	/** orders the draft flags on a day the published set does not */
	addedOrders: number;
	/** orders the published set flags on a day the draft does not */
	removedOrders: number;
	addedOrderDays: number;
	removedOrderDays: number;
};

export type BackTestResult = {
	days: number;
	publishedVersion: number;
	/** order-days evaluated: the latest assessment per order per day in the window */
	orderDays: number;
	orders: number;
	activeOrders: number;
	byRule: Record<string, { title: string; history: HistoryCounts; now: { open: number; supersede: number } }>;
	ms: number;
};

const emptyHistory = (): HistoryCounts => ({ draftOrders: 0, publishedOrders: 0, addedOrders: 0, removedOrders: 0, addedOrderDays: 0, removedOrderDays: 0 });

/**
 * Replays a draft over the last `days` days of stored assessments (the latest per order per day, days in
 * the hospital's time zone) and over today's active orders, comparing with the published set. Writes
 * nothing. "now" counts are exactly what publishing the draft would open and supersede at this moment.
 */
export async function backTest(
	draft: { id: string; version: number; rules: RuleDefinition[] },
	options: { days: number; db?: DbOrTx; now?: Date; onProgress?: (p: Progress) => void; signal?: AbortSignal; batchSize?: number }
): Promise<BackTestResult> {
	const started = performance.now();
	const db = options.db ?? getDb();
	const now = options.now ?? new Date();
	const published = await getActiveRuleSet(db);
	const agents = await loadAgents(db);
	const since = new Date(now.getTime() - options.days * 86_400_000);
	const draftEnabled = draft.rules.filter((r) => r.enabled);
	const publishedEnabled = published.rules.filter((r) => r.enabled);
	// a rule the draft leaves as it is holds for the same orders under both sets: it is evaluated once
	const draftByKey = new Map(draftEnabled.map((r) => [r.key, JSON.stringify(r)]));
	const unchanged = publishedEnabled.filter((r) => draftByKey.get(r.key) === JSON.stringify(r)).map((r) => r.key);
	const publishedChanged = publishedEnabled.filter((r) => !unchanged.includes(r.key));
	const titles = new Map<string, string>([...published.rules, ...draft.rules].map((r) => [r.key, r.title]));
	const sets = new Map<
		string,
		{ draft: Set<string>; published: Set<string>; added: Set<string>; removed: Set<string>; addedDays: number; removedDays: number }
	>();
	const setsFor = (key: string) => {
		let s = sets.get(key);
		if (!s) sets.set(key, (s = { draft: new Set(), published: new Set(), added: new Set(), removed: new Set(), addedDays: 0, removedDays: 0 }));
		return s;
	};
	for (const key of titles.keys()) setsFor(key);

	const orderIds = rows<{ order_id: string }>(
		await db.execute(
			sql`select distinct order_id from assessments where at >= ${since.toISOString()}::timestamptz and at <= ${now.toISOString()}::timestamptz order by order_id`
		)
	).map((r) => r.order_id);
	const chunk = options.batchSize ?? 500;
	let orderDays = 0;
	for (let i = 0; i < orderIds.length; i += chunk) {
		if (options.signal?.aborted) throw new Error('Back-test cancelled.');
		const ids = orderIds.slice(i, i + chunk);
		const list = rows<AssessmentRow>(
			await db.execute(sql`
				with latest as (
					select distinct on (d.order_id, d.day) d.id
					from (
						select a.id, a.order_id, a.at, a.created_at, (a.at at time zone ${config.hospitalTimeZone})::date as day
						from assessments a
						where a.order_id = any(${sql.param(ids)}::uuid[]) and a.at >= ${since.toISOString()}::timestamptz and a.at <= ${now.toISOString()}::timestamptz
					) d
					order by d.order_id, d.day, d.at desc, d.created_at desc
				)
				select o.id as order_id, o.patient_id, o.status, o.dose_mg, o.interval_h, o.infusion_h, o.route, o.start_at, o.agent_id,
					a.id as assessment_id, a.at, a.result, ${STABLE_STEP} as stable_step
				from latest l join assessments a on a.id = l.id join orders o on o.id = a.order_id`)
		);
		for (const row of list) {
			const candidate = toCandidate(row, agents);
			if (!candidate) continue;
			orderDays++;
			const d = new Map(evaluateRules(draftEnabled, candidate.facts).map((o) => [o.key, o.status]));
			const p = new Map(evaluateRules(publishedChanged, candidate.facts).map((o) => [o.key, o.status]));
			for (const key of unchanged) {
				const status = d.get(key);
				if (status !== undefined) p.set(key, status);
			}
			for (const key of titles.keys()) {
				const ds = d.get(key);
				const ps = p.get(key);
				const s = setsFor(key);
				if (ds === 'holds') s.draft.add(row.order_id);
				if (ps === 'holds') s.published.add(row.order_id);
				if (ds === 'holds' && ps !== 'holds') {
					s.added.add(row.order_id);
					s.addedDays++;
				}
				if (ps === 'holds' && ds !== 'holds') {
					s.removed.add(row.order_id);
					s.removedDays++;
				}
			}
		}
		options.onProgress?.({ phase: 'history', done: Math.min(i + chunk, orderIds.length), total: orderIds.length });
	}

	const activeOrders = await countActiveOrders(db);
	const nowCounts: SyncResult = { byRule: {}, totals: { opened: 0, refreshed: 0, superseded: 0, woke: 0 } };
	let done = 0;
	const draftRef: RuleSetRef = { id: draft.id, version: draft.version, rules: draft.rules };
	for await (const { candidates, scanned } of activeOrderBatches(db, { batchSize: REPLAY_BATCH })) {
		if (options.signal?.aborted) throw new Error('Back-test cancelled.');
		merge(nowCounts, await syncFlags(db, draftRef, candidates, { dryRun: true, now }));
		done += scanned;
		options.onProgress?.({ phase: 'now', done, total: activeOrders });
	}

	const byRule: BackTestResult['byRule'] = {};
	for (const [key, title] of titles) {
		const s = setsFor(key);
		byRule[key] = {
			title,
			history: {
				...emptyHistory(),
				draftOrders: s.draft.size,
				publishedOrders: s.published.size,
				addedOrders: s.added.size,
				removedOrders: s.removed.size,
				addedOrderDays: s.addedDays,
				removedOrderDays: s.removedDays
			},
			now: { open: nowCounts.byRule[key]?.opened ?? 0, supersede: nowCounts.byRule[key]?.superseded ?? 0 }
		};
	}
	return {
		days: options.days,
		publishedVersion: published.version,
		orderDays,
		orders: orderIds.length,
		activeOrders,
		byRule,
		ms: Math.round(performance.now() - started)
	};
}
