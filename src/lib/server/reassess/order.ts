// Re-assessment of orders: load the facts for a batch of orders with a handful of set-based queries,
// run the clinical core, store the assessments with their inputs, and hand them to rule evaluation in
// the same transaction. Also how the feed queues this work (in the feed's own transaction).
import type { Route, Sex } from '../../domain/vocabulary';
import { randomUUID } from 'node:crypto';
import { sql } from 'drizzle-orm';
import {
	assess,
	ClinicalInputError,
	renalReplacementEpisodes,
	storeAssessInput,
	usesMeasuredLevels,
	type AgentParams,
	type AssessInput,
	type Assessment,
	type RenalReplacementEpisode,
	type RenalReplacementEvent,
	type StoredAssessInput
} from '../../clinical';
import { getDb, type Database, type DbOrTx } from '../db';
import { aucWindowOf, bandToleranceOf } from '../../rules/default-rules';
import { evaluateAssessments, type StoredAssessment } from '../flags';
import { withdrawStale } from '../recommendations';
import { getActiveRuleSet } from '../rules';
import { measuredDosingMany } from '../levels';
import { logger } from '../logger';
import { holdWaiting, QUEUES, sendMany } from '../queue';

export type ReassessJob = { orderId: string };

/**
 * Queues one order.reassess job per order inside the caller's transaction (lost with it on rollback).
 * The queue keeps one waiting job per order (singleton key = order id, policy in jobs/order-reassess.ts).
 * An order that already has a job waiting gets no second one: that job is held until this transaction
 * ends (holdWaiting), so a worker cannot take it and assess the order on the facts from before this
 * transaction's commit (a job merely found waiting, without the lock, could be). The others get a new
 * job. A new job that meets one committed meanwhile by another transaction is dropped by pg-boss
 * (singleton key), so such orders are held on a second pass, and inserted again if that job was taken
 * in between.
 */
export async function enqueueReassess(tx: DbOrTx, orderIds: Iterable<string>): Promise<number> {
	const ids = [...new Set(orderIds)];
	if (ids.length === 0) return 0;
	let missing = ids;
	for (let pass = 0; pass < 4 && missing.length > 0; pass++) {
		if (pass > 0) {
			await sendMany(
				QUEUES.orderReassess,
				missing.map((orderId) => ({ data: { orderId } satisfies ReassessJob, singletonKey: orderId })),
				{ tx }
			);
		}
		const held = await holdWaiting(tx, QUEUES.orderReassess, missing);
		missing = missing.filter((id) => !held.has(id));
	}
	if (missing.length > 0) throw new Error(`could not queue order.reassess for ${missing.length} orders`);
	return ids.length;
}

type OrderFacts = {
	id: string;
	patient_id: string;
	dose_mg: number;
	interval_h: number;
	infusion_h: number;
	route: Route;
	status: 'active' | 'stopped';
	start_at: Date;
	stopped_at: Date | null;
	restarted_at: Date | null;
	agent_id: string;
	code: string;
	name: string;
	agent_class: string;
	params: AgentParams;
	birth_date: string;
	sex: Sex;
};

type PatientHistory = {
	creatinine: { at: Date; creatinine: { value: number; unit: 'mg/dL' } }[];
	albumin: { at: Date; gL: number }[];
	heights: { at: Date; cm: number }[];
	weights: { at: Date; kg: number }[];
	renalReplacement: RenalReplacementEpisode[];
};

type RenalReplacementRow = {
	patient_id: string;
	kind: 'session' | 'condition' | 'set' | 'clear';
	mode: 'ihd' | 'pd' | 'crrt' | null;
	from_at: Date;
	to_at: Date | null;
};

/**
 * The periods on dialysis or CRRT from a patient's events. A condition "CKD stage 5 on dialysis" does
 * not say the modality: peritoneal dialysis when a PD session is on record, else intermittent haemodialysis.
 */
export function episodesFrom(rows: readonly RenalReplacementRow[]): RenalReplacementEpisode[] {
	const pd = rows.some((r) => r.kind === 'session' && r.mode === 'pd');
	const events: RenalReplacementEvent[] = rows.map((r) => {
		const from = toDate(r.from_at);
		const to = r.to_at === null ? null : toDate(r.to_at);
		if (r.kind === 'clear') return { kind: 'clear', at: from };
		if (r.kind === 'set') return { kind: 'set', mode: r.mode as 'ihd' | 'pd' | 'crrt', from };
		if (r.kind === 'condition') return { kind: 'condition', mode: pd ? 'pd' : (r.mode as 'ihd' | 'pd' | 'crrt'), from, to };
		return { kind: 'session', mode: r.mode as 'ihd' | 'pd' | 'crrt', from, to };
	});
	return renalReplacementEpisodes(events);
}

/** Renal replacement periods of some patients, by patient id (patients without events are absent). */
export async function loadRenalReplacement(tx: DbOrTx, patientIds: string[]): Promise<Map<string, RenalReplacementEpisode[]>> {
	const out = new Map<string, RenalReplacementEpisode[]>();
	if (patientIds.length === 0) return out;
	const byPatient = new Map<string, RenalReplacementRow[]>();
	for (const r of rows<RenalReplacementRow>(
		await tx.execute(sql`
			select patient_id, kind, mode, from_at, to_at from renal_replacement_events
			where patient_id = any(${sql.param(patientIds)}::uuid[]) order by from_at`)
	)) {
		const list = byPatient.get(r.patient_id) ?? [];
		list.push(r);
		byPatient.set(r.patient_id, list);
	}
	for (const [id, list] of byPatient) out.set(id, episodesFrom(list));
	return out;
}

const HOUR_MS = 3_600_000;
/** history kept before the earlier of order start and now: 7-day baseline, 48-h rise, value at start (KDIGO window + margin) */
const HISTORY_MARGIN_H = 9 * 24;

const toDate = (v: unknown) => (v instanceof Date ? v : new Date(v as string));
const rows = <T>(result: unknown) => Array.from(result as Iterable<T>);

/** Facts for a batch of orders, in three queries whatever the batch size. */
async function loadFacts(tx: DbOrTx, orderIds: string[], at: Date) {
	const orderRows = rows<OrderFacts>(
		await tx.execute(sql`
			select o.id, o.patient_id, o.dose_mg, o.interval_h, o.infusion_h, o.route, o.status, o.start_at, o.stopped_at, o.restarted_at,
				a.id as agent_id, a.code, a.name, a.agent_class, a.params,
				p.birth_date::text as birth_date, p.sex
			from orders o
			join agents a on a.id = o.agent_id
			join patients p on p.id = o.patient_id
			where o.id = any(${sql.param(orderIds)}::uuid[])
			-- in id order, so concurrent batches open flags in the same order and queue rather than deadlock
			order by o.id`)
	).map((o) => ({
		...o,
		start_at: toDate(o.start_at),
		stopped_at: o.stopped_at === null ? null : toDate(o.stopped_at),
		restarted_at: o.restarted_at === null ? null : toDate(o.restarted_at)
	}));

	const since = new Map<string, number>();
	for (const o of orderRows) {
		const from = Math.min(o.start_at.getTime(), at.getTime()) - HISTORY_MARGIN_H * HOUR_MS;
		since.set(o.patient_id, Math.min(since.get(o.patient_id) ?? Infinity, from));
	}
	const patientIds = [...since.keys()];
	const history = new Map<string, PatientHistory>(
		patientIds.map((id) => [id, { creatinine: [], albumin: [], heights: [], weights: [], renalReplacement: [] }])
	);
	if (patientIds.length === 0) return { orderRows, history };

	const [labs, body, dialysis] = await Promise.all([
		tx.execute(sql`
			select r.patient_id, r.analyte, r.value_normalised, r.observed_at
			from lab_results r
			join jsonb_to_recordset(${JSON.stringify(patientIds.map((id) => ({ pid: id, since: new Date(since.get(id) as number).toISOString() })))}::jsonb)
				as w(pid uuid, since timestamptz)
				on r.patient_id = w.pid and r.observed_at >= w.since
			where r.observed_at <= ${at.toISOString()}::timestamptz
			order by r.observed_at`),
		tx.execute(sql`
			select patient_id, kind, value_normalised, observed_at
			from body_measurements
			where patient_id = any(${sql.param(patientIds)}::uuid[]) and observed_at <= ${at.toISOString()}::timestamptz
			order by observed_at`),
		loadRenalReplacement(tx, patientIds)
	]);
	for (const [id, episodes] of dialysis) (history.get(id) as PatientHistory).renalReplacement = episodes;
	for (const r of rows<{ patient_id: string; analyte: string; value_normalised: number; observed_at: Date }>(labs)) {
		const h = history.get(r.patient_id);
		if (!h) continue;
		const t = toDate(r.observed_at);
		if (r.analyte === 'creatinine') h.creatinine.push({ at: t, creatinine: { value: r.value_normalised, unit: 'mg/dL' } });
		else h.albumin.push({ at: t, gL: r.value_normalised });
	}
	for (const r of rows<{ patient_id: string; kind: string; value_normalised: number; observed_at: Date }>(body)) {
		const h = history.get(r.patient_id);
		if (!h) continue;
		const t = toDate(r.observed_at);
		if (r.kind === 'height') h.heights.push({ at: t, cm: r.value_normalised });
		else h.weights.push({ at: t, kg: r.value_normalised });
	}
	return { orderRows, history };
}

function newestAt(h: PatientHistory, atMs: number): Date | null {
	let best: Date | null = null;
	for (const list of [h.creatinine, h.albumin, h.heights, h.weights]) {
		for (const item of list) if (item.at.getTime() <= atMs && (best === null || item.at > best)) best = item.at;
	}
	return best;
}

const newestOf = (a: Date | null, b: Date | null) => (a === null ? b : b === null || a >= b ? a : b);

/** The assessment as stored in `assessments.result` (the trace has its own column). */
function withoutTrace(a: Assessment): Omit<Assessment, 'trace'> {
	const { trace, ...rest } = a;
	void trace;
	return rest;
}

type AssessmentRow = {
	id: string;
	order_id: string;
	patient_id: string;
	at: Date;
	complete: boolean;
	crcl_ml_min: number | null;
	half_life_h: number | null;
	albumin_gl: number | null;
	result: Omit<Assessment, 'trace'>;
	input: StoredAssessInput;
};

const finiteOrNull = (n: number | null | undefined) => (typeof n === 'number' && Number.isFinite(n) ? n : null);

/**
 * A batch's assessments in one statement with one parameter (the rows as a JSON array), which
 * PostgreSQL reads with jsonb_to_recordset: building and binding thousands of separate parameters
 * cost more than the assessments themselves. The trace column stays null (re-run on demand).
 */
async function insertAssessments(tx: DbOrTx, values: AssessmentRow[]) {
	for (let i = 0; i < values.length; i += 500) {
		await tx.execute(sql`
			insert into assessments (id, order_id, patient_id, at, complete, crcl_ml_min, half_life_h, albumin_gl, result, input)
			select id, order_id, patient_id, at, complete, crcl_ml_min, half_life_h, albumin_gl, result, input
			from jsonb_to_recordset(${JSON.stringify(values.slice(i, i + 500))}::jsonb) as v(
				id uuid, order_id uuid, patient_id uuid, at timestamptz, complete boolean,
				crcl_ml_min float8, half_life_h float8, albumin_gl float8, result jsonb, input jsonb)`);
	}
}

export type ReassessResult = { assessed: number; skipped: { orderId: string; reason: string }[]; stored: StoredAssessment[] };

/**
 * Re-assesses the given orders now (a stopped order at its stop time, so rules can see it ended),
 * stores one assessment per order and runs rule evaluation, all in one transaction.
 */
export async function reassessOrders(orderIds: string[], options: { db?: Database; now?: Date } = {}): Promise<ReassessResult> {
	const ids = [...new Set(orderIds)];
	if (ids.length === 0) return { assessed: 0, skipped: [], stored: [] };
	const now = options.now ?? new Date();
	return (options.db ?? getDb()).transaction(async (tx) => {
		// No wait for the disk at commit: pg-boss marks the jobs completed afterwards in a transaction that
		// does wait, and the log is written in order, so a completed job's assessments are on disk too; if
		// the server stops before that, the jobs were never completed and are retried.
		await tx.execute(sql`set local synchronous_commit = off`);
		const { orderRows, history } = await loadFacts(tx, ids, now);
		// the assessment's "within / above / below" uses the active rule set's tolerance, as the rules do
		const ruleSet = await getActiveRuleSet(tx);
		const aucWindowMgHL = aucWindowOf(ruleSet.rules);
		const settings = { bandTolerance: bandToleranceOf(ruleSet.rules), ...(aucWindowMgHL ? { aucWindowMgHL } : {}) };
		const atOf = (o: OrderFacts) => (o.status === 'stopped' && o.stopped_at !== null && o.stopped_at < now ? o.stopped_at : now);
		// doses given and levels only for orders whose agent is dosed from levels (two queries for the batch;
		// none at all for a batch without such orders)
		const measured = await measuredDosingMany(
			orderRows
				.filter((o) => usesMeasuredLevels(o.params))
				.map((o) => ({ id: o.id, patientId: o.patient_id, agentId: o.agent_id, startAt: o.start_at, stoppedAt: o.stopped_at, at: atOf(o) })),
			tx
		);
		const found = new Set(orderRows.map((o) => o.id));
		const skipped = ids.filter((id) => !found.has(id)).map((orderId) => ({ orderId, reason: 'order no longer exists' }));
		// one params object per agent, so the clinical core validates each agent once per batch
		const agentParams = new Map<string, AgentParams>();
		const stored: StoredAssessment[] = [];
		const values: AssessmentRow[] = [];
		for (const o of orderRows) {
			const at = atOf(o);
			const dosing = measured.get(o.id);
			const h = history.get(o.patient_id) as PatientHistory;
			if (!agentParams.has(o.agent_id)) agentParams.set(o.agent_id, o.params);
			const params = agentParams.get(o.agent_id) as AgentParams;
			const input: AssessInput = {
				at,
				patient: {
					birthDate: new Date(`${o.birth_date}T00:00:00Z`),
					sex: o.sex,
					heights: h.heights,
					weights: h.weights,
					...(h.renalReplacement.length > 0 ? { renalReplacement: h.renalReplacement } : {})
				},
				creatinine: h.creatinine,
				albumin: h.albumin,
				agent: params,
				order: { doseMg: o.dose_mg, intervalH: o.interval_h, infusionH: o.infusion_h, route: o.route, startAt: o.start_at, restartAt: o.restarted_at },
				settings,
				...(dosing ? { administrations: dosing.administrations, levels: dosing.levels } : {})
			};
			let assessment: Assessment;
			try {
				assessment = assess(input);
			} catch (error) {
				if (!(error instanceof ClinicalInputError)) throw error;
				// bad facts for one order must not hold back the others; the reason is logged (ids only)
				logger.warn('order not assessed', { orderId: o.id, input: error.input, reason: error.message });
				skipped.push({ orderId: o.id, reason: error.message });
				continue;
			}
			const assessmentId = randomUUID();
			values.push({
				id: assessmentId,
				order_id: o.id,
				patient_id: o.patient_id,
				at,
				complete: assessment.complete,
				crcl_ml_min: finiteOrNull(assessment.renal.crclMlMin),
				half_life_h: finiteOrNull(assessment.kinetics.now?.halfLifeH),
				albumin_gl: finiteOrNull(assessment.albumin.latestGL),
				result: withoutTrace(assessment),
				// the inputs, not the trace: a trace is ten times their size and is re-run from them on demand
				input: storeAssessInput(input)
			});
			stored.push({
				assessmentId,
				orderId: o.id,
				patientId: o.patient_id,
				agent: { id: o.agent_id, code: o.code, name: o.name, agentClass: o.agent_class, params },
				order: {
					id: o.id,
					doseMg: o.dose_mg,
					intervalH: o.interval_h,
					infusionH: o.infusion_h,
					route: o.route,
					startAt: o.start_at,
					status: o.status
				},
				assessment,
				lastResultAt: newestOf(newestAt(h, at.getTime()), assessment.measured?.latestLevelAt ?? null)
			});
		}
		await insertAssessments(tx, values);
		if (stored.length > 0) await evaluateAssessments(tx, stored, ruleSet, { now });
		// a recommendation written against the order as it was no longer fits a stopped or changed order
		await withdrawStale(now, { tx, orderIds: orderRows.map((o) => o.id) });
		return { assessed: stored.length, skipped, stored };
	});
}
