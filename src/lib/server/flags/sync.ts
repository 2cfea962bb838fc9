// Flags from assessments: one open flag per order, holding a finding per rule that holds. Findings join
// the flag, are restated while they hold and resolve inside it when they no longer do; the flag closes as
// superseded when none is left (or the order stopped). Set-based: a handful of statements per batch
// whatever its size; every change writes a flag event.
import { randomUUID } from 'node:crypto';
import { sql } from 'drizzle-orm';
import type { AgentParams, Assessment } from '../../clinical/types';
import { buildFacts, type AssessmentLike, type Facts } from '../../rules/facts';
import { evaluateRules, type RuleOutcome } from '../../rules/evaluate';
import { bandToleranceOf } from '../../rules/default-rules';
import { changeLog2, priorityScore } from '../../rules/priority';
import { moreUrgent, type Severity } from '../../domain/vocabulary';
import type { DbOrTx } from '../db';
import type { FlagState } from '../db/schema';
import { notify } from '../notifications';
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

/** Counts per rule, of findings: raised (in a new flag or joining one), refreshed, resolved, woke. */
export type RuleCounts = { opened: number; refreshed: number; superseded: number; woke: number };
export type SyncResult = { byRule: Record<string, RuleCounts>; totals: RuleCounts };

type OpenFinding = { id: string; rule_key: string; severity: Severity; priority: number; text: string; suggested_action: string | null; assessment_id: string };

type OpenFlag = {
	id: string;
	version: number;
	order_id: string;
	state: FlagState;
	severity: Severity;
	assessment_id: string;
	assigned_to: string | null;
	snooze_until_next_result: boolean;
	opened_at: Date;
	assessment_at: Date;
	snoozed_at: Date | null;
	snoozed_from: FlagState | null;
	findings: Map<string, OpenFinding>;
};

type Closure = { order_id: string; rule_key: string; closed_at: Date; order_updated_at: Date };

/** A finding as this assessment states it. */
type Stated = { outcome: RuleOutcome; priority: number };
type Resolve = { finding: OpenFinding; reason: string };

type Open = { candidate: Candidate; findings: Stated[] };
/** An open flag whose findings change: some join, some are restated, some resolve; at least one remains. */
type Update = {
	flag: OpenFlag;
	candidate: Candidate;
	joins: Stated[];
	restated: { finding: OpenFinding; stated: Stated }[];
	resolves: Resolve[];
	headline: Headline;
	wakeTo: FlagState | null;
	escalated: boolean;
};
type Close = { flag: OpenFlag; candidate: Candidate | null; reason: string; resolves: Resolve[] };
type Headline = { ruleKey: string; severity: Severity; priority: number; text: string; suggestedAction: string | null };

const HOUR_MS = 3_600_000;
const rows = <T>(result: unknown) => Array.from(result as Iterable<T>);
const toDate = (v: unknown) => (v instanceof Date ? v : new Date(v as string));
const zero = (): RuleCounts => ({ opened: 0, refreshed: 0, superseded: 0, woke: 0 });

/** The worst of a flag's findings (severity, then priority): the flag's headline and priority. */
export function worstFinding<T extends { severity: Severity; priority: number }>(findings: T[]): T {
	return findings.reduce((worst, f) => (moreUrgent(f.severity, worst.severity) || (f.severity === worst.severity && f.priority > worst.priority) ? f : worst));
}

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

/** Newest creatinine, albumin or measured level behind a stored assessment (weights and heights are not kept in it). */
export function basisOf(assessment: AssessmentLike): Date {
	let best = toDate(assessment.at).getTime();
	const times = [assessment.creatinine.latestAt, assessment.albumin.latestAt, assessment.measured?.latestLevelAt ?? null]
		.filter((t) => t !== null)
		.map((t) => toDate(t).getTime());
	if (times.length > 0) best = Math.max(...times);
	return new Date(best);
}

/**
 * Runs the active rule set over freshly stored assessments inside the same transaction and opens,
 * refreshes or supersedes flags. Owned by the rules-and-flags work; the feed pipeline calls it.
 */
export async function evaluateAssessments(tx: DbOrTx, stored: StoredAssessment[], activeRuleSet?: RuleSetRef, options: { now?: Date } = {}): Promise<void> {
	if (stored.length === 0) return;
	const ruleSet = activeRuleSet ?? (await getActiveRuleSet(tx));
	const tolerance = bandToleranceOf(ruleSet.rules);
	await syncFlags(
		tx,
		ruleSet,
		stored.map((s) => candidateFrom(s, tolerance)),
		{ now: options.now }
	);
}

/** State a snoozed flag wakes to: the state it was snoozed from. */
function wakeState(flag: OpenFlag): FlagState {
	if (flag.snoozed_from === 'new' || flag.snoozed_from === 'in_review') return flag.snoozed_from;
	return flag.assigned_to ? 'in_review' : 'new';
}

/**
 * Brings the flags of the candidates' orders in line with a rule set: one open flag per order, holding
 * one finding per rule that holds. A rule that starts to hold joins the order's open flag (or opens
 * one); a finding that stops holding resolves inside it; a flag left with no finding closes as
 * superseded. With `dryRun` nothing is written and the counts say what would change (the back-test's
 * "if published now").
 *
 * Flags are read without locks and only the ones about to change are locked (locking every open flag
 * would write a row lock into each of them on every replay). If one of those changed in between — a
 * pharmacist acted on it — or another worker opened a flag for the same order, the batch is planned
 * again with every open flag locked.
 */
export async function syncFlags(
	tx: DbOrTx,
	ruleSet: RuleSetRef,
	input: Candidate[],
	options: { dryRun?: boolean; now?: Date; lockAll?: boolean } = {}
): Promise<SyncResult> {
	const result: SyncResult = { byRule: {}, totals: zero() };
	const count: Count = (key, what, n = 1) => {
		(result.byRule[key] ??= zero())[what] += n;
		result.totals[what] += n;
	};
	const candidates = newestPerOrder(input);
	if (candidates.length === 0) return result;
	const now = options.now ?? new Date();
	const { openByOrder, closures } = await readOpenFlags(tx, candidates, options.lockAll === true && !options.dryRun);
	const plan = planChanges(candidates, openByOrder, closures, ruleSet, now);

	if (options.dryRun) {
		countPlan(plan, count);
		return result;
	}
	if (!options.lockAll && (await changedSinceRead(tx, plan))) return syncFlags(tx, ruleSet, input, { ...options, lockAll: true });

	const writing: Writing = { tx, ruleSet, now, count, events: [], findingInserts: [], version: { ruleVersionId: ruleSet.id, ruleVersion: ruleSet.version } };
	const conflicted = await openFlags(writing, plan.opens);
	await updateFlags(writing, plan.updates);
	await closeFlags(writing, plan.closes);
	const resolutions = [
		...plan.updates.flatMap((u) => u.resolves.map((r) => ({ r, assessmentId: u.candidate.assessmentId }))),
		...plan.closes.flatMap((c) => c.resolves.map((r) => ({ r, assessmentId: c.candidate?.assessmentId ?? null })))
	];
	await resolveFindings(
		tx,
		resolutions.map(({ r, assessmentId }) => ({ id: r.finding.id, assessment_id: assessmentId, reason: r.reason })),
		now
	);
	await insertFindings(tx, writing.findingInserts, ruleSet.id, now);
	await writeEvents(tx, writing.events, now);
	if (conflicted) {
		const again = await syncFlags(tx, ruleSet, input, { ...options, lockAll: true });
		for (const [key, counts] of Object.entries(again.byRule)) for (const k of Object.keys(counts) as (keyof RuleCounts)[]) count(key, k, counts[k]);
	}
	return result;
}

type Count = (key: string, what: keyof RuleCounts, n?: number) => void;
type Plan = { opens: Open[]; updates: Update[]; closes: Close[] };
/** What the write steps of one sync share: the events and findings they collect are written last. */
type Writing = {
	tx: DbOrTx;
	ruleSet: RuleSetRef;
	now: Date;
	count: Count;
	events: FlagEventRow[];
	findingInserts: FindingInsert[];
	version: { ruleVersionId: string; ruleVersion: number };
};

/** The newest assessment per order wins. */
function newestPerOrder(input: Candidate[]): Candidate[] {
	const byOrder = new Map<string, Candidate>();
	for (const c of input) {
		const seen = byOrder.get(c.orderId);
		if (!seen || seen.assessmentAt < c.assessmentAt) byOrder.set(c.orderId, c);
	}
	return [...byOrder.values()];
}

/**
 * Narrow, index-backed reads rather than one join: the open flags, their open findings, the time of
 * the assessment behind each flag, and the snooze of the few that are snoozed; and the findings of
 * flags closed by a person.
 */
async function readOpenFlags(tx: DbOrTx, candidates: Candidate[], lockAll: boolean) {
	const orderIds = candidates.map((c) => c.orderId);
	const patientIds = [...new Set(candidates.map((c) => c.patientId))];
	const lock = lockAll ? sql`for update of f` : sql``;
	const [openRows, closureRows] = await Promise.all([
		tx.execute(sql`
			select f.id, f.order_id, f.state, f.severity, f.assessment_id, f.assigned_to, f.snooze_until_next_result, f.opened_at, f.version
			from flags f
			where f.order_id = any(${sql.param(orderIds)}::uuid[]) and f.state <> 'closed'
			order by f.id
			${lock}`),
		// findings of flags closed by a person: the same condition on the same data does not raise them again
		tx.execute(sql`
			select distinct on (f.order_id, ff.rule_key) f.order_id, ff.rule_key, f.closed_at, o.updated_at as order_updated_at
			from flags f join orders o on o.id = f.order_id join flag_findings ff on ff.flag_id = f.id
			where f.patient_id = any(${sql.param(patientIds)}::uuid[]) and f.order_id = any(${sql.param(orderIds)}::uuid[])
				and f.state = 'closed' and f.outcome <> 'superseded' and ff.resolved_at is null
			order by f.order_id, ff.rule_key, f.closed_at desc`)
	]);
	const openList = rows<Omit<OpenFlag, 'assessment_at' | 'snoozed_at' | 'snoozed_from' | 'findings'>>(openRows);
	const openIds = openList.map((f) => f.id);
	const snoozedIds = openList.filter((f) => f.state === 'snoozed').map((f) => f.id);
	const [findingRows, assessedRows, snoozeRows] = await Promise.all([
		openIds.length === 0
			? []
			: tx.execute(sql`
				select flag_id, id, rule_key, severity, priority, text, suggested_action, assessment_id from flag_findings
				where flag_id = any(${sql.param(openIds)}::uuid[]) and resolved_at is null`),
		openIds.length === 0
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
	const openByOrder = new Map<string, OpenFlag>();
	const openById = new Map<string, OpenFlag>();
	for (const raw of openList) {
		const snooze = snoozes.get(raw.id);
		const flag: OpenFlag = {
			...raw,
			opened_at: toDate(raw.opened_at),
			assessment_at: assessedAt.get(raw.assessment_id) ?? new Date(0),
			snoozed_at: snooze ? toDate(snooze.at) : null,
			snoozed_from: snooze ? snooze.from_state : null,
			findings: new Map()
		};
		openByOrder.set(flag.order_id, flag);
		openById.set(flag.id, flag);
	}
	for (const f of rows<OpenFinding & { flag_id: string }>(findingRows)) {
		const { flag_id, ...finding } = f;
		openById.get(flag_id)?.findings.set(finding.rule_key, finding);
	}
	const closures = new Map<string, Closure>();
	for (const c of rows<Closure>(closureRows))
		closures.set(`${c.order_id}|${c.rule_key}`, { ...c, closed_at: toDate(c.closed_at), order_updated_at: toDate(c.order_updated_at) });

	return { openByOrder, closures };
}

/** What would change: flags to open, open flags whose findings change, and flags to close. */
function planChanges(candidates: Candidate[], openByOrder: Map<string, OpenFlag>, closures: Map<string, Closure>, ruleSet: RuleSetRef, now: Date): Plan {
	const enabled = ruleSet.rules.filter((r) => r.enabled);
	const opens: Open[] = [];
	const updates: Update[] = [];
	const closes: Close[] = [];

	for (const candidate of candidates) {
		const flag = openByOrder.get(candidate.orderId) ?? null;
		// an older assessment than the one behind the open flag (a replay racing a new result) decides nothing
		if (flag && flag.assessment_at > candidate.assessmentAt) continue;
		if (!candidate.orderActive) {
			if (flag)
				closes.push({
					flag,
					candidate,
					reason: 'order stopped',
					resolves: [...flag.findings.values()].map((finding) => ({ finding, reason: 'order stopped' }))
				});
			continue;
		}
		const change = changeLog2(candidate.facts);
		const ageH = flag ? (now.getTime() - flag.opened_at.getTime()) / HOUR_MS : 0;
		const holding: Stated[] = [];
		const resolves: Resolve[] = [];
		const decided = new Set<string>();
		for (const outcome of evaluateRules(enabled, candidate.facts)) {
			decided.add(outcome.key);
			const open = flag?.findings.get(outcome.key);
			if (outcome.status === 'holds') {
				if (!open) {
					const closed = closures.get(`${candidate.orderId}|${outcome.key}`);
					const basis = Math.max(candidate.basisAt.getTime(), closed?.order_updated_at.getTime() ?? 0);
					if (closed && closed.closed_at.getTime() >= basis) continue;
				}
				holding.push({ outcome, priority: priorityScore({ severity: outcome.severity, changeLog2: change, ageH }) });
			} else if (outcome.status === 'quiet' && open) {
				resolves.push({ finding: open, reason: 'condition no longer holds' });
			}
			// indeterminate: a missing fact neither raises nor resolves a finding
		}
		if (!flag) {
			if (holding.length > 0) opens.push({ candidate, findings: holding });
			continue;
		}
		for (const finding of flag.findings.values()) {
			if (!decided.has(finding.rule_key)) resolves.push({ finding, reason: 'rule switched off or removed' });
		}
		const joins = holding.filter((h) => !flag.findings.has(h.outcome.key));
		const restated = holding.filter((h) => flag.findings.has(h.outcome.key)).map((stated) => ({ finding: flag.findings.get(stated.outcome.key)!, stated }));
		const resolvedKeys = new Set(resolves.map((r) => r.finding.rule_key));
		const kept = [...flag.findings.values()].filter((f) => !resolvedKeys.has(f.rule_key) && !holding.some((h) => h.outcome.key === f.rule_key));
		const remaining: Headline[] = [
			...holding.map((h) => ({
				ruleKey: h.outcome.key,
				severity: h.outcome.severity,
				priority: h.priority,
				text: h.outcome.finding,
				suggestedAction: h.outcome.suggestedAction
			})),
			...kept.map((f) => ({ ruleKey: f.rule_key, severity: f.severity, priority: f.priority, text: f.text, suggestedAction: f.suggested_action }))
		];
		if (remaining.length === 0) {
			closes.push({ flag, candidate, reason: 'every finding resolved', resolves });
			continue;
		}
		const escalated = joins.some((j) => moreUrgent(j.outcome.severity, flag.severity));
		const nextResult = flag.snooze_until_next_result && flag.snoozed_at !== null && candidate.basisAt > flag.snoozed_at;
		const wakeTo = flag.state === 'snoozed' && (nextResult || escalated) ? wakeState(flag) : null;
		// A new rule version alone does not touch a flag whose findings are unchanged: the flag stays
		// traceable to the version and assessment that raised (or last changed) it, and a publish writes
		// only the flags it really changes.
		const restatedChanged = restated.some(
			({ finding, stated }) =>
				finding.assessment_id !== candidate.assessmentId || finding.text !== stated.outcome.finding || finding.severity !== stated.outcome.severity
		);
		if (joins.length === 0 && resolves.length === 0 && !restatedChanged && wakeTo === null) continue;
		updates.push({ flag, candidate, joins, restated, resolves, headline: worstFinding(remaining), wakeTo, escalated });
	}

	return { opens, updates, closes };
}

/** The counts a plan would give, for a dry run (the back-test's "if published now"). */
function countPlan({ opens, updates, closes }: Plan, count: Count) {
	for (const o of opens) for (const f of o.findings) count(f.outcome.key, 'opened');
	for (const u of updates) {
		for (const j of u.joins) count(j.outcome.key, 'opened');
		for (const r of u.restated) count(r.finding.rule_key, 'refreshed');
		for (const r of u.resolves) count(r.finding.rule_key, 'superseded');
		if (u.wakeTo) count(u.headline.ruleKey, 'woke');
	}
	for (const c of closes) for (const r of c.resolves) count(r.finding.rule_key, 'superseded');
}

/**
 * Locks the flags the plan changes and says whether any of them moved since they were read (a
 * pharmacist acted on one, or it closed).
 */
async function changedSinceRead(tx: DbOrTx, { updates, closes }: Plan): Promise<boolean> {
	const touched = [...updates.map((u) => u.flag), ...closes.map((c) => c.flag)];
	if (touched.length > 0) {
		const locked = rows<{ id: string; version: number; state: FlagState }>(
			await tx.execute(sql`select id, version, state from flags where id = any(${sql.param(touched.map((f) => f.id))}::uuid[]) order by id for update`)
		);
		const lockedById = new Map(locked.map((r) => [r.id, r]));
		const moved = touched.some((f) => {
			const current = lockedById.get(f.id);
			return !current || current.version !== f.version || current.state === 'closed';
		});
		return moved;
	}
	return false;
}

/** Opens the planned flags; true when another worker opened one of the same orders first. */
async function openFlags({ tx, ruleSet, now, count, events, findingInserts, version }: Writing, opens: Open[]): Promise<boolean> {
	let conflicted = false;
	for (let i = 0; i < opens.length; i += 1000) {
		const planned = opens
			.slice(i, i + 1000)
			.map((o) => ({ o, id: randomUUID(), headline: worstFinding(o.findings.map((f) => ({ ...f, severity: f.outcome.severity }))) }));
		const chunk = planned.map(({ o, id, headline }) => ({
			id,
			order_id: o.candidate.orderId,
			patient_id: o.candidate.patientId,
			rule_key: headline.outcome.key,
			assessment_id: o.candidate.assessmentId,
			assessment_at: o.candidate.assessmentAt.toISOString(),
			severity: headline.outcome.severity,
			priority: headline.priority,
			finding: headline.outcome.finding,
			suggested_action: headline.outcome.suggestedAction,
			facts: o.candidate.facts
		}));
		const inserted = new Set(
			rows<{ id: string }>(
				await tx.execute(sql`
					insert into flags (id, order_id, patient_id, rule_key, rule_version_id, assessment_id, state, severity, priority, finding, suggested_action, facts, opened_at, updated_at)
					select v.id, v.order_id, v.patient_id, v.rule_key, ${ruleSet.id}::uuid, v.assessment_id, 'new', v.severity::severity, v.priority,
						v.finding, v.suggested_action, v.facts, ${now.toISOString()}::timestamptz, ${now.toISOString()}::timestamptz
					from jsonb_to_recordset(${JSON.stringify(chunk)}::jsonb) as v(
						id uuid, order_id uuid, patient_id uuid, rule_key text, assessment_id uuid, assessment_at timestamptz,
						severity text, priority double precision, finding text, suggested_action text, facts jsonb)
					where not exists (select 1 from assessments n where n.order_id = v.order_id and n.at > v.assessment_at)
					on conflict (order_id) where state <> 'closed' do nothing
					returning id`)
			).map((r) => r.id)
		);
		for (const { o, id, headline } of planned) {
			if (!inserted.has(id)) {
				// another worker opened this order's flag since the read (or a newer assessment exists)
				if (!(await newerAssessmentExists(tx, o.candidate))) conflicted = true;
				continue;
			}
			for (const f of o.findings) {
				count(f.outcome.key, 'opened');
				findingInserts.push(findingInsert(id, o.candidate, f));
			}
			events.push({
				flagId: id,
				kind: 'opened',
				fromState: null,
				toState: 'new',
				data: {
					...version,
					assessmentId: o.candidate.assessmentId,
					severity: headline.outcome.severity,
					priority: headline.priority,
					findings: o.findings.map((f) => f.outcome.key)
				}
			});
		}
	}
	return conflicted;
}

/**
 * Joins, restates and resolves findings in open flags, wakes the snoozed ones a change concerns, and
 * tells the holder of a flag a more severe finding joined.
 */
async function updateFlags({ tx, ruleSet, now, count, events, findingInserts, version }: Writing, updates: Update[]) {
	for (const u of updates) {
		for (const j of u.joins) {
			count(j.outcome.key, 'opened');
			findingInserts.push(findingInsert(u.flag.id, u.candidate, j));
			events.push({
				flagId: u.flag.id,
				kind: 'finding_joined',
				fromState: u.flag.state,
				toState: u.flag.state,
				data: {
					...version,
					assessmentId: u.candidate.assessmentId,
					ruleKey: j.outcome.key,
					severity: j.outcome.severity,
					raisedSeverity: moreUrgent(j.outcome.severity, u.flag.severity)
				}
			});
		}
		for (const r of u.restated) count(r.finding.rule_key, 'refreshed');
		if (u.flag.assessment_id !== u.candidate.assessmentId) {
			events.push({
				flagId: u.flag.id,
				kind: 'refreshed',
				fromState: u.flag.state,
				toState: u.flag.state,
				data: { ...version, assessmentId: u.candidate.assessmentId, severity: u.headline.severity, priority: u.headline.priority }
			});
		}
		for (const r of u.resolves) {
			count(r.finding.rule_key, 'superseded');
			events.push({
				flagId: u.flag.id,
				kind: 'finding_resolved',
				fromState: u.flag.state,
				toState: u.flag.state,
				data: { ...version, assessmentId: u.candidate.assessmentId, ruleKey: r.finding.rule_key, reason: r.reason }
			});
		}
		if (u.wakeTo) {
			count(u.headline.ruleKey, 'woke');
			events.push({
				flagId: u.flag.id,
				kind: 'woke',
				fromState: 'snoozed',
				toState: u.wakeTo,
				data: { reason: u.escalated ? 'a more severe finding joined' : 'new result', assessmentId: u.candidate.assessmentId }
			});
		}
	}

	for (let i = 0; i < updates.length; i += 1000) {
		const chunk = updates.slice(i, i + 1000);
		await tx.execute(sql`
			update flags f set
				assessment_id = v.assessment_id, rule_version_id = ${ruleSet.id}::uuid, rule_key = v.rule_key, severity = v.severity::severity, priority = v.priority,
				finding = v.finding, suggested_action = v.suggested_action, facts = v.facts,
				state = case when v.wake_to is not null and f.state = 'snoozed' then v.wake_to::flag_state else f.state end,
				snooze_until_next_result = case when v.wake_to is not null and f.state = 'snoozed' then false else f.snooze_until_next_result end,
				escalated_at = case when v.escalated then ${now.toISOString()}::timestamptz else f.escalated_at end,
				version = f.version + 1, updated_at = ${now.toISOString()}::timestamptz
			from jsonb_to_recordset(${JSON.stringify(
				chunk.map((u) => ({
					id: u.flag.id,
					assessment_id: u.candidate.assessmentId,
					rule_key: u.headline.ruleKey,
					severity: u.headline.severity,
					priority: u.headline.priority,
					finding: u.headline.text,
					suggested_action: u.headline.suggestedAction,
					facts: u.candidate.facts,
					wake_to: u.wakeTo,
					escalated: u.escalated
				}))
			)}::jsonb) as v(
				id uuid, assessment_id uuid, rule_key text, severity text, priority double precision, finding text, suggested_action text, facts jsonb, wake_to text, escalated boolean)
			where f.id = v.id`);
		const restated = chunk.flatMap((u) =>
			u.restated.map(({ finding, stated }) => ({
				id: finding.id,
				assessment_id: u.candidate.assessmentId,
				severity: stated.outcome.severity,
				priority: stated.priority,
				text: stated.outcome.finding,
				suggested_action: stated.outcome.suggestedAction
			}))
		);
		if (restated.length > 0) {
			await tx.execute(sql`
				update flag_findings ff set assessment_id = v.assessment_id, rule_version_id = ${ruleSet.id}::uuid, severity = v.severity::severity,
					priority = v.priority, text = v.text, suggested_action = v.suggested_action, updated_at = ${now.toISOString()}::timestamptz
				from jsonb_to_recordset(${JSON.stringify(restated)}::jsonb) as v(id uuid, assessment_id uuid, severity text, priority double precision, text text, suggested_action text)
				where ff.id = v.id`);
		}
		for (const u of chunk) {
			if (!u.escalated || !u.flag.assigned_to) continue;
			const joined = worstFinding(u.joins.map((j) => ({ ...j, severity: j.outcome.severity })));
			await notify(
				tx,
				u.flag.assigned_to,
				`A ${joined.outcome.severity}-severity finding joined a flag you hold: ${joined.outcome.finding}`,
				`/flags/${u.flag.id}`,
				now
			);
		}
	}
}

/** Closes as superseded the flags left with no finding or whose order stopped. */
async function closeFlags({ tx, now, count, events, version }: Writing, closes: Close[]) {
	for (let i = 0; i < closes.length; i += 5000) {
		const chunk = closes.slice(i, i + 5000);
		await tx.execute(sql`
			update flags set state = 'closed', outcome = 'superseded', closed_at = ${now.toISOString()}::timestamptz,
				snooze_until_next_result = false, version = version + 1, updated_at = ${now.toISOString()}::timestamptz
			where id = any(${sql.param(chunk.map((c) => c.flag.id))}::uuid[]) and state <> 'closed'`);
		for (const c of chunk) {
			for (const r of c.resolves) {
				count(r.finding.rule_key, 'superseded');
				events.push({
					flagId: c.flag.id,
					kind: 'finding_resolved',
					fromState: c.flag.state,
					toState: c.flag.state,
					data: { ...version, assessmentId: c.candidate?.assessmentId ?? null, ruleKey: r.finding.rule_key, reason: r.reason }
				});
			}
			events.push({
				flagId: c.flag.id,
				kind: 'closed',
				fromState: c.flag.state,
				toState: 'closed',
				data: { outcome: 'superseded', reason: c.reason, ...version, assessmentId: c.candidate?.assessmentId ?? null }
			});
		}
	}
}

type FlagEventRow = { flagId: string; kind: string; fromState: FlagState | null; toState: FlagState | null; data: unknown };
type FindingInsert = {
	flag_id: string;
	rule_key: string;
	severity: Severity;
	priority: number;
	text: string;
	suggested_action: string | null;
	assessment_id: string;
};

function findingInsert(flagId: string, candidate: Candidate, stated: Stated): FindingInsert {
	return {
		flag_id: flagId,
		rule_key: stated.outcome.key,
		severity: stated.outcome.severity,
		priority: stated.priority,
		text: stated.outcome.finding,
		suggested_action: stated.outcome.suggestedAction,
		assessment_id: candidate.assessmentId
	};
}

async function newerAssessmentExists(tx: DbOrTx, candidate: Candidate): Promise<boolean> {
	const found = rows(
		await tx.execute(
			sql`select 1 from assessments where order_id = ${candidate.orderId}::uuid and at > ${candidate.assessmentAt.toISOString()}::timestamptz limit 1`
		)
	);
	return found.length > 0;
}

async function insertFindings(tx: DbOrTx, findings: FindingInsert[], ruleVersionId: string, now: Date) {
	for (let i = 0; i < findings.length; i += 5000) {
		await tx.execute(sql`
			insert into flag_findings (flag_id, rule_key, rule_version_id, severity, priority, text, suggested_action, assessment_id, raised_assessment_id, raised_at, updated_at)
			select v.flag_id, v.rule_key, ${ruleVersionId}::uuid, v.severity::severity, v.priority, v.text, v.suggested_action, v.assessment_id, v.assessment_id,
				${now.toISOString()}::timestamptz, ${now.toISOString()}::timestamptz
			from jsonb_to_recordset(${JSON.stringify(findings.slice(i, i + 5000))}::jsonb) as v(
				flag_id uuid, rule_key text, severity text, priority double precision, text text, suggested_action text, assessment_id uuid)
			on conflict (flag_id, rule_key) where resolved_at is null do nothing`);
	}
}

async function resolveFindings(tx: DbOrTx, resolved: { id: string; assessment_id: string | null; reason: string }[], now: Date) {
	for (let i = 0; i < resolved.length; i += 5000) {
		await tx.execute(sql`
			update flag_findings ff set resolved_at = ${now.toISOString()}::timestamptz, resolved_assessment_id = v.assessment_id,
				resolved_reason = v.reason, updated_at = ${now.toISOString()}::timestamptz
			from jsonb_to_recordset(${JSON.stringify(resolved.slice(i, i + 5000))}::jsonb) as v(id uuid, assessment_id uuid, reason text)
			where ff.id = v.id and ff.resolved_at is null`);
	}
}

async function writeEvents(tx: DbOrTx, events: FlagEventRow[], now: Date) {
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
 * Closes as superseded every open flag of a stopped order (all stopped orders, or the ones given),
 * resolving its findings. The replay runs it; the feed may call it when it stops orders without
 * re-assessing them.
 */
export async function supersedeFlagsOfStoppedOrders(tx: DbOrTx, orderIds?: string[], now = new Date()): Promise<number> {
	const filter = orderIds ? sql`and f.order_id = any(${sql.param(orderIds)}::uuid[])` : sql``;
	const closed = rows<{ id: string; from_state: FlagState }>(
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
			returning f.id, t.state as from_state`)
	);
	if (closed.length === 0) return 0;
	const resolved = rows<{ id: string; flag_id: string; rule_key: string }>(
		await tx.execute(sql`
			update flag_findings set resolved_at = ${now.toISOString()}::timestamptz, resolved_reason = 'order stopped', updated_at = ${now.toISOString()}::timestamptz
			where flag_id = any(${sql.param(closed.map((c) => c.id))}::uuid[]) and resolved_at is null
			returning id, flag_id, rule_key`)
	);
	const fromState = new Map(closed.map((c) => [c.id, c.from_state]));
	await writeEvents(
		tx,
		[
			...resolved.map((r) => ({
				flagId: r.flag_id,
				kind: 'finding_resolved',
				fromState: fromState.get(r.flag_id)!,
				toState: fromState.get(r.flag_id)!,
				data: { ruleKey: r.rule_key, reason: 'order stopped' }
			})),
			...closed.map((c) => ({
				flagId: c.id,
				kind: 'closed',
				fromState: c.from_state,
				toState: 'closed' as FlagState,
				data: { outcome: 'superseded', reason: 'order stopped' }
			}))
		],
		now
	);
	return closed.length;
}
