// Flags from assessments: opens a flag when a rule holds, refreshes the open flag while it still holds,
// closes it as superseded when it no longer does (or the order stopped, or the rule was switched off).
// Set-based: a handful of statements per batch whatever its size; every change writes a flag event.
import { randomUUID } from 'node:crypto';
import { sql } from 'drizzle-orm';
import type { AgentParams, Assessment } from '../../clinical/types';
import { buildFacts, type AssessmentLike, type Facts } from '../../rules/facts';
import { evaluateRules, type RuleOutcome } from '../../rules/evaluate';
import { bandToleranceOf } from '../../rules/default-rules';
import { changeLog2, priorityScore } from '../../rules/priority';
import type { Severity } from '../../rules/types';
import type { DbOrTx } from '../db';
import type { FlagState } from '../db/schema';
import { getActiveRuleSet, type RuleSetRef } from '../rules';

/** One freshly stored assessment, as the order.reassess job hands it to rule evaluation. */
export type StoredAssessment = {
	assessmentId: string;
	orderId: string;
	patientId: string;
	agent: { id: string; code: string; name: string; agentClass: string; params: AgentParams };
	order: { id: string; doseMg: number; intervalH: number; infusionH: number; route: string; startAt: Date; status: 'active' | 'stopped' };
	assessment: Assessment;
	/** time of the newest creatinine/albumin/weight/height result that fed this assessment */
	lastResultAt: Date | null;
};

/** What the flag engine needs of one assessment: its facts and when its newest input arrived. */
export type Candidate = {
	orderId: string;
	patientId: string;
	assessmentId: string;
	assessmentAt: Date;
	/** newest result behind the assessment (wakes "until next result" snoozes, lifts closure suppression) */
	basisAt: Date;
	orderActive: boolean;
	facts: Facts;
};

export type RuleCounts = { opened: number; refreshed: number; superseded: number; woke: number };
export type SyncResult = { byRule: Record<string, RuleCounts>; totals: RuleCounts };

type OpenFlag = {
	id: string;
	version: number;
	order_id: string;
	rule_key: string;
	state: FlagState;
	severity: Severity;
	finding: string;
	assessment_id: string;
	rule_version_id: string;
	assigned_to: string | null;
	snooze_until_next_result: boolean;
	opened_at: Date;
	assessment_at: Date;
	snoozed_at: Date | null;
	snoozed_from: FlagState | null;
};

type Closure = { order_id: string; rule_key: string; closed_at: Date; order_updated_at: Date };

type Open = { candidate: Candidate; outcome: RuleOutcome; priority: number };
type Refresh = { flag: OpenFlag; candidate: Candidate; outcome: RuleOutcome; priority: number; wakeTo: FlagState | null };
type Supersede = { flag: OpenFlag; candidate: Candidate | null; reason: string };

const HOUR_MS = 3_600_000;
const rows = <T>(result: unknown) => Array.from(result as Iterable<T>);
const toDate = (v: unknown) => (v instanceof Date ? v : new Date(v as string));
const zero = (): RuleCounts => ({ opened: 0, refreshed: 0, superseded: 0, woke: 0 });

/** The facts and timing of a freshly stored assessment. */
export function candidateFrom(stored: StoredAssessment, bandTolerance?: number): Candidate {
	const at = toDate(stored.assessment.at);
	return {
		orderId: stored.orderId,
		patientId: stored.patientId,
		assessmentId: stored.assessmentId,
		assessmentAt: at,
		basisAt: stored.lastResultAt ?? at,
		orderActive: stored.order.status === 'active',
		facts: buildFacts({ assessment: stored.assessment, agent: stored.agent, order: stored.order, bandTolerance })
	};
}

/** Newest creatinine or albumin behind a stored assessment (weights and heights are not kept in it). */
export function basisOf(assessment: AssessmentLike): Date {
	let best = toDate(assessment.at).getTime();
	const times = [assessment.creatinine.latestAt, assessment.albumin.latestAt].filter((t) => t !== null).map((t) => toDate(t).getTime());
	if (times.length > 0) best = Math.max(...times);
	return new Date(best);
}

/**
 * Runs the active rule set over freshly stored assessments inside the same transaction and opens,
 * refreshes or supersedes flags. Owned by the rules-and-flags work; the feed pipeline calls it.
 */
export async function evaluateAssessments(tx: DbOrTx, stored: StoredAssessment[], activeRuleSet?: RuleSetRef): Promise<void> {
	if (stored.length === 0) return;
	const ruleSet = activeRuleSet ?? (await getActiveRuleSet(tx));
	const tolerance = bandToleranceOf(ruleSet.rules);
	await syncFlags(tx, ruleSet, stored.map((s) => candidateFrom(s, tolerance)));
}

/** State a flag snoozed "until the next result" returns to: the state it was snoozed from. */
function wakeState(flag: OpenFlag): FlagState {
	if (flag.snoozed_from === 'new' || flag.snoozed_from === 'in_review') return flag.snoozed_from;
	return flag.assigned_to ? 'in_review' : 'new';
}

/**
 * Brings the flags of the candidates' orders in line with a rule set. With `dryRun` nothing is written
 * and the counts say what would change (the back-test's "if published now").
 *
 * Flags are read without locks and only the ones about to change are locked (locking every open flag
 * would write a row lock into each of them on every replay). If one of those changed in between — a
 * pharmacist acted on it — the batch is planned again with every open flag locked.
 */
export async function syncFlags(
	tx: DbOrTx,
	ruleSet: RuleSetRef,
	input: Candidate[],
	options: { dryRun?: boolean; now?: Date; lockAll?: boolean } = {}
): Promise<SyncResult> {
	const result: SyncResult = { byRule: {}, totals: zero() };
	const count = (key: string, what: keyof RuleCounts, n = 1) => {
		(result.byRule[key] ??= zero())[what] += n;
		result.totals[what] += n;
	};
	// the newest assessment per order wins
	const byOrder = new Map<string, Candidate>();
	for (const c of input) {
		const seen = byOrder.get(c.orderId);
		if (!seen || seen.assessmentAt < c.assessmentAt) byOrder.set(c.orderId, c);
	}
	const candidates = [...byOrder.values()];
	if (candidates.length === 0) return result;
	const now = options.now ?? new Date();
	const orderIds = candidates.map((c) => c.orderId);
	const patientIds = [...new Set(candidates.map((c) => c.patientId))];
	const lock = options.lockAll && !options.dryRun ? sql`for update of f` : sql``;

	// Three narrow, index-backed reads rather than one join: the open flags (locked), the time of the
	// assessment behind each, and the snooze of the few that are snoozed.
	const [openRows, closureRows] = await Promise.all([
		tx.execute(sql`
			select f.id, f.order_id, f.rule_key, f.state, f.severity, f.finding, f.assessment_id, f.rule_version_id, f.assigned_to,
				f.snooze_until_next_result, f.opened_at, f.version
			from flags f
			where f.order_id = any(${sql.param(orderIds)}::uuid[]) and f.state <> 'closed'
			order by f.id
			${lock}`),
		// flags closed by a person: the same condition on the same data does not open a new one
		tx.execute(sql`
			select distinct on (f.order_id, f.rule_key) f.order_id, f.rule_key, f.closed_at, o.updated_at as order_updated_at
			from flags f join orders o on o.id = f.order_id
			where f.patient_id = any(${sql.param(patientIds)}::uuid[]) and f.order_id = any(${sql.param(orderIds)}::uuid[])
				and f.state = 'closed' and f.outcome <> 'superseded'
			order by f.order_id, f.rule_key, f.closed_at desc`)
	]);
	const openList = rows<Omit<OpenFlag, 'assessment_at' | 'snoozed_at' | 'snoozed_from'>>(openRows);
	const snoozedIds = openList.filter((f) => f.state === 'snoozed').map((f) => f.id);
	const [assessedRows, snoozeRows] = await Promise.all([
		openList.length === 0
			? []
			: tx.execute(sql`select id, at from assessments where id = any(${sql.param([...new Set(openList.map((f) => f.assessment_id))])}::uuid[])`),
		snoozedIds.length === 0
			? []
			: tx.execute(sql`
				select distinct on (flag_id) flag_id, at, from_state from flag_events
				where flag_id = any(${sql.param(snoozedIds)}::uuid[]) and kind = 'snoozed'
				order by flag_id, id desc`)
	]);
	const assessedAt = new Map(rows<{ id: string; at: Date }>(assessedRows).map((r) => [r.id, toDate(r.at)]));
	const snoozes = new Map(rows<{ flag_id: string; at: Date; from_state: FlagState }>(snoozeRows).map((r) => [r.flag_id, r]));
	const openByOrder = new Map<string, Map<string, OpenFlag>>();
	for (const raw of openList) {
		const snooze = snoozes.get(raw.id);
		const flag: OpenFlag = {
			...raw,
			opened_at: toDate(raw.opened_at),
			assessment_at: assessedAt.get(raw.assessment_id) ?? new Date(0),
			snoozed_at: snooze ? toDate(snooze.at) : null,
			snoozed_from: snooze ? snooze.from_state : null
		};
		let m = openByOrder.get(flag.order_id);
		if (!m) openByOrder.set(flag.order_id, (m = new Map()));
		m.set(flag.rule_key, flag);
	}
	const closures = new Map<string, Closure>();
	for (const c of rows<Closure>(closureRows)) closures.set(`${c.order_id}|${c.rule_key}`, { ...c, closed_at: toDate(c.closed_at), order_updated_at: toDate(c.order_updated_at) });

	const enabled = ruleSet.rules.filter((r) => r.enabled);
	const opens: Open[] = [];
	const refreshes: Refresh[] = [];
	const supersedes: Supersede[] = [];

	for (const candidate of candidates) {
		const open = openByOrder.get(candidate.orderId) ?? new Map<string, OpenFlag>();
		if (!candidate.orderActive) {
			for (const flag of open.values()) supersedes.push({ flag, candidate, reason: 'order stopped' });
			continue;
		}
		const outcomes = evaluateRules(enabled, candidate.facts);
		const decided = new Set<string>();
		const change = changeLog2(candidate.facts);
		for (const outcome of outcomes) {
			decided.add(outcome.key);
			const flag = open.get(outcome.key);
			// an older assessment than the one behind the open flag (a replay racing a new result) decides nothing
			if (flag && flag.assessment_at > candidate.assessmentAt) continue;
			if (outcome.status === 'holds') {
				if (flag) {
					const ageH = (now.getTime() - flag.opened_at.getTime()) / HOUR_MS;
					const wakeTo =
						flag.state === 'snoozed' && flag.snooze_until_next_result && flag.snoozed_at !== null && candidate.basisAt > flag.snoozed_at ? wakeState(flag) : null;
					// A new rule version alone does not touch a flag whose finding is unchanged: the flag stays
					// traceable to the version and assessment that raised (or last changed) it, and a publish
					// writes only the flags it really changes.
					const changed =
						flag.assessment_id !== candidate.assessmentId || flag.finding !== outcome.finding || flag.severity !== outcome.severity || wakeTo !== null;
					if (changed) refreshes.push({ flag, candidate, outcome, priority: priorityScore({ severity: outcome.severity, changeLog2: change, ageH }), wakeTo });
				} else {
					const closed = closures.get(`${candidate.orderId}|${outcome.key}`);
					const basis = Math.max(candidate.basisAt.getTime(), closed?.order_updated_at.getTime() ?? 0);
					if (closed && closed.closed_at.getTime() >= basis) continue;
					opens.push({ candidate, outcome, priority: priorityScore({ severity: outcome.severity, changeLog2: change, ageH: 0 }) });
				}
			} else if (outcome.status === 'quiet' && flag) {
				supersedes.push({ flag, candidate, reason: 'condition no longer holds' });
			}
			// indeterminate: a missing fact neither opens nor closes a flag
		}
		for (const flag of open.values()) {
			if (!decided.has(flag.rule_key)) supersedes.push({ flag, candidate, reason: 'rule switched off or removed' });
		}
	}

	if (options.dryRun) {
		for (const o of opens) count(o.outcome.key, 'opened');
		for (const r of refreshes) {
			count(r.flag.rule_key, 'refreshed');
			if (r.wakeTo) count(r.flag.rule_key, 'woke');
		}
		for (const s of supersedes) count(s.flag.rule_key, 'superseded');
		return result;
	}

	if (!options.lockAll) {
		const touched = [...refreshes.map((r) => r.flag), ...supersedes.map((s) => s.flag)];
		if (touched.length > 0) {
			const locked = rows<{ id: string; version: number; state: FlagState }>(
				await tx.execute(sql`select id, version, state from flags where id = any(${sql.param(touched.map((f) => f.id))}::uuid[]) order by id for update`)
			);
			const lockedById = new Map(locked.map((r) => [r.id, r]));
			const moved = touched.some((f) => {
				const current = lockedById.get(f.id);
				return !current || current.version !== f.version || current.state === 'closed';
			});
			if (moved) return syncFlags(tx, ruleSet, input, { ...options, lockAll: true });
		}
	}

	const events: { flagId: string; kind: string; fromState: FlagState | null; toState: FlagState | null; data: unknown }[] = [];

	for (let i = 0; i < opens.length; i += 1000) {
		const chunk = opens.slice(i, i + 1000).map((o) => ({
			id: randomUUID(),
			order_id: o.candidate.orderId,
			patient_id: o.candidate.patientId,
			rule_key: o.outcome.key,
			assessment_id: o.candidate.assessmentId,
			assessment_at: o.candidate.assessmentAt.toISOString(),
			severity: o.outcome.severity,
			priority: o.priority,
			finding: o.outcome.finding,
			suggested_action: o.outcome.suggestedAction,
			facts: o.candidate.facts
		}));
		const inserted = rows<{ id: string; rule_key: string; severity: Severity; priority: number; assessment_id: string }>(
			await tx.execute(sql`
				insert into flags (id, order_id, patient_id, rule_key, rule_version_id, assessment_id, state, severity, priority, finding, suggested_action, facts, opened_at, updated_at)
				select v.id, v.order_id, v.patient_id, v.rule_key, ${ruleSet.id}::uuid, v.assessment_id, 'new', v.severity::severity, v.priority,
					v.finding, v.suggested_action, v.facts, ${now.toISOString()}::timestamptz, ${now.toISOString()}::timestamptz
				from jsonb_to_recordset(${JSON.stringify(chunk)}::jsonb) as v(
					id uuid, order_id uuid, patient_id uuid, rule_key text, assessment_id uuid, assessment_at timestamptz,
					severity text, priority double precision, finding text, suggested_action text, facts jsonb)
				where not exists (select 1 from assessments n where n.order_id = v.order_id and n.at > v.assessment_at)
				on conflict (order_id, rule_key) where state <> 'closed' do nothing
				returning id, rule_key, severity, priority, assessment_id`)
		);
		for (const f of inserted) {
			count(f.rule_key, 'opened');
			events.push({ flagId: f.id, kind: 'opened', fromState: null, toState: 'new', data: { ruleVersionId: ruleSet.id, ruleVersion: ruleSet.version, assessmentId: f.assessment_id, severity: f.severity, priority: f.priority } });
		}
	}

	for (let i = 0; i < refreshes.length; i += 1000) {
		const chunk = refreshes.slice(i, i + 1000).map((r) => ({
			id: r.flag.id,
			assessment_id: r.candidate.assessmentId,
			severity: r.outcome.severity,
			priority: r.priority,
			finding: r.outcome.finding,
			suggested_action: r.outcome.suggestedAction,
			facts: r.candidate.facts,
			wake_to: r.wakeTo
		}));
		await tx.execute(sql`
			update flags f set
				assessment_id = v.assessment_id, rule_version_id = ${ruleSet.id}::uuid, severity = v.severity::severity, priority = v.priority,
				finding = v.finding, suggested_action = v.suggested_action, facts = v.facts,
				state = case when v.wake_to is not null and f.state = 'snoozed' then v.wake_to::flag_state else f.state end,
				snooze_until_next_result = case when v.wake_to is not null and f.state = 'snoozed' then false else f.snooze_until_next_result end,
				version = f.version + 1, updated_at = ${now.toISOString()}::timestamptz
			from jsonb_to_recordset(${JSON.stringify(chunk)}::jsonb) as v(
				id uuid, assessment_id uuid, severity text, priority double precision, finding text, suggested_action text, facts jsonb, wake_to text)
			where f.id = v.id`);
		for (const r of refreshes.slice(i, i + 1000)) {
			count(r.flag.rule_key, 'refreshed');
			events.push({
				flagId: r.flag.id,
				kind: 'refreshed',
				fromState: r.flag.state,
				toState: r.flag.state,
				data: { ruleVersionId: ruleSet.id, ruleVersion: ruleSet.version, assessmentId: r.candidate.assessmentId, severity: r.outcome.severity, priority: r.priority }
			});
			if (r.wakeTo) {
				count(r.flag.rule_key, 'woke');
				events.push({ flagId: r.flag.id, kind: 'woke', fromState: 'snoozed', toState: r.wakeTo, data: { reason: 'new result', assessmentId: r.candidate.assessmentId } });
			}
		}
	}

	for (let i = 0; i < supersedes.length; i += 5000) {
		const chunk = supersedes.slice(i, i + 5000);
		await tx.execute(sql`
			update flags set state = 'closed', outcome = 'superseded', closed_at = ${now.toISOString()}::timestamptz,
				snooze_until_next_result = false, version = version + 1, updated_at = ${now.toISOString()}::timestamptz
			where id = any(${sql.param(chunk.map((s) => s.flag.id))}::uuid[]) and state <> 'closed'`);
		for (const s of chunk) {
			count(s.flag.rule_key, 'superseded');
			events.push({
				flagId: s.flag.id,
				kind: 'closed',
				fromState: s.flag.state,
				toState: 'closed',
				data: { outcome: 'superseded', reason: s.reason, ruleVersionId: ruleSet.id, ruleVersion: ruleSet.version, assessmentId: s.candidate?.assessmentId ?? null }
			});
		}
	}

	await writeEvents(tx, events, now);
	return result;
}

async function writeEvents(tx: DbOrTx, events: { flagId: string; kind: string; fromState: FlagState | null; toState: FlagState | null; data: unknown }[], now: Date) {
	for (let i = 0; i < events.length; i += 5000) {
		const chunk = events.slice(i, i + 5000).map((e) => ({ flag_id: e.flagId, kind: e.kind, from_state: e.fromState, to_state: e.toState, data: e.data }));
		// actor_id null: the system made the change
		await tx.execute(sql`
			insert into flag_events (flag_id, actor_id, kind, from_state, to_state, data, at)
			select v.flag_id, null, v.kind, v.from_state::flag_state, v.to_state::flag_state, v.data, ${now.toISOString()}::timestamptz
			from jsonb_to_recordset(${JSON.stringify(chunk)}::jsonb) as v(flag_id uuid, kind text, from_state text, to_state text, data jsonb)`);
	}
}

/**
 * Closes as superseded every open flag of a stopped order (all stopped orders, or the ones given).
 * The replay runs it; the feed may call it when it stops orders without re-assessing them.
 */
export async function supersedeFlagsOfStoppedOrders(tx: DbOrTx, orderIds?: string[], now = new Date()): Promise<number> {
	const filter = orderIds ? sql`and f.order_id = any(${sql.param(orderIds)}::uuid[])` : sql``;
	const closed = rows<{ id: string; rule_key: string; from_state: FlagState }>(
		await tx.execute(sql`
			with target as (
				select f.id, f.state from flags f join orders o on o.id = f.order_id
				where o.status = 'stopped' and f.state <> 'closed' ${filter}
				order by f.id
				for update of f
			)
			update flags f set state = 'closed', outcome = 'superseded', closed_at = ${now.toISOString()}::timestamptz,
				snooze_until_next_result = false, version = f.version + 1, updated_at = ${now.toISOString()}::timestamptz
			from target t where f.id = t.id
			returning f.id, f.rule_key, t.state as from_state`)
	);
	await writeEvents(
		tx,
		closed.map((c) => ({ flagId: c.id, kind: 'closed', fromState: c.from_state, toState: 'closed' as FlagState, data: { outcome: 'superseded', reason: 'order stopped' } })),
		now
	);
	return closed.length;
}
