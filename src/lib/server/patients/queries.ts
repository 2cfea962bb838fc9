// Patient view: demographics, ward and bed, body size, orders with their latest assessment, lab and
// renal history, flag history, and the concentration–time projection of an order's regimen.
import { and, asc, desc, eq, sql } from 'drizzle-orm';
import { ageOnDate } from '../../clinical/age';
import type { Assessment, KineticsSnapshot, ProposedRegimen } from '../../clinical/types';
import { compareDose } from '../../clinical/reference-regimen';
import { PROPOSAL_CAUTION } from '../../clinical/trace';
import type { FlagHistoryItem } from '../../flags/board';
import { projectSeries, targetWindow, PROJECTION_HOURS, type ProjectionSeries, type RegimenInput, type TargetWindow } from '../../projection';
import type { ProjectionQuery } from '../../validation/patients';
import { bandToleranceOf } from '../../rules/default-rules';
import { getDb, type DbOrTx } from '../db';
import { agents, assessments, bodyMeasurements, encounters, flags, labResults, orders, patients } from '../db/schema';
import { getActiveRuleSet } from '../rules';
import { measuredLevelsOf, type MeasuredLevelsView } from './measured-levels';

export const EXAMPLE_PARAMETERS_NOTE = 'Agent parameters are example data to be reviewed by the institution before clinical use.';

type StoredResult = Omit<Assessment, 'trace'>;

/** The encounter the patient is in now: the open one admitted last, else the last one. */
export async function currentEncounter(patientId: string, db: DbOrTx = getDb()) {
	const [encounter] = await db
		.select({ id: encounters.id, ward: encounters.ward, bed: encounters.bed, admittedAt: encounters.admittedAt, dischargedAt: encounters.dischargedAt })
		.from(encounters)
		.where(eq(encounters.patientId, patientId))
		.orderBy(sql`${encounters.dischargedAt} is null desc`, desc(encounters.admittedAt))
		.limit(1);
	return encounter ?? null;
}

async function latestMeasurement(patientId: string, kind: 'height' | 'weight', db: DbOrTx) {
	const [row] = await db
		.select({ value: bodyMeasurements.valueNormalised, at: bodyMeasurements.observedAt })
		.from(bodyMeasurements)
		.where(and(eq(bodyMeasurements.patientId, patientId), eq(bodyMeasurements.kind, kind)))
		.orderBy(desc(bodyMeasurements.observedAt))
		.limit(1);
	return row ?? null;
}

/** Header facts: who, where, and body size (IBW/AdjBW/dosing weight from the latest assessment). */
export async function patientSummary(patientId: string, db: DbOrTx = getDb()) {
	const [patient] = await db.select().from(patients).where(eq(patients.id, patientId));
	if (!patient) return null;
	const [encounter, height, weight, [latest]] = await Promise.all([
		currentEncounter(patientId, db),
		latestMeasurement(patientId, 'height', db),
		latestMeasurement(patientId, 'weight', db),
		db
			.select({ at: assessments.at, result: assessments.result })
			.from(assessments)
			.where(eq(assessments.patientId, patientId))
			.orderBy(desc(assessments.at), desc(assessments.createdAt))
			.limit(1)
	]);
	const covariates = latest?.result.covariates ?? null;
	return {
		id: patient.id,
		mrn: patient.mrn,
		givenName: patient.givenName,
		familyName: patient.familyName,
		birthDate: patient.birthDate,
		ageYears: ageOnDate(patient.birthDate, new Date()),
		sex: patient.sex,
		ward: encounter?.ward ?? null,
		bed: encounter?.bed ?? null,
		admittedAt: encounter?.admittedAt.toISOString() ?? null,
		discharged: encounter ? encounter.dischargedAt !== null : false,
		heightCm: height?.value ?? null,
		heightAt: height?.at.toISOString() ?? null,
		weightKg: weight?.value ?? null,
		weightAt: weight?.at.toISOString() ?? null,
		body: covariates
			? {
					assessedAt: new Date(latest.at).toISOString(),
					idealBodyWeightKg: covariates.idealBodyWeightKg,
					adjustedBodyWeightKg: covariates.adjustedBodyWeightKg,
					dosingWeightKg: covariates.dosingWeightKg,
					weightBasis: covariates.weightBasis,
					bsaM2: covariates.bsaM2
				}
			: null
	};
}
export type PatientSummary = NonNullable<Awaited<ReturnType<typeof patientSummary>>>;

export type OrderView = {
	id: string;
	status: 'active' | 'stopped';
	agent: { id: string; code: string; name: string; agentClass: string };
	doseMg: number;
	intervalH: number;
	infusionH: number;
	route: string;
	startAt: string;
	stoppedAt: string | null;
	restartedAt: string | null;
	prescriberName: string | null;
	target: TargetWindow | null;
	latest: {
		id: string;
		at: string;
		complete: boolean;
		missing: string[];
		crclMlMin: number | null;
		crclAtStartMlMin: number | null;
		halfLifeH: number | null;
		halfLifeAtStartH: number | null;
		peakMgL: number | null;
		troughMgL: number | null;
		auc24MgHL: number | null;
		comparedToBand: string;
		proposed: ProposedRegimen | null;
	} | null;
};

const RECENT_DAYS = 30;

async function patientOrders(patientId: string, db: DbOrTx): Promise<OrderView[]> {
	const rows = await db
		.select({ order: orders, agent: { id: agents.id, code: agents.code, name: agents.name, agentClass: agents.agentClass, params: agents.params } })
		.from(orders)
		.innerJoin(agents, eq(agents.id, orders.agentId))
		.where(and(eq(orders.patientId, patientId), sql`(${orders.status} = 'active' or ${orders.stoppedAt} > now() - make_interval(days => ${RECENT_DAYS}))`))
		.orderBy(asc(orders.status), desc(orders.startAt))
		.limit(40);
	if (rows.length === 0) return [];
	const latest = await db.execute<{ id: string; orderId: string; at: Date; complete: boolean; result: StoredResult }>(sql`
		select distinct on (order_id) id, order_id as "orderId", at, complete, result
		from assessments where patient_id = ${patientId}
		order by order_id, at desc, created_at desc`);
	const byOrder = new Map([...latest].map((a) => [a.orderId, a]));
	// "within / above / below" with the rule set's tolerance today, as the rules and the flag page say it
	// (an assessment keeps the tolerance of the day it was made)
	const tolerance = bandToleranceOf((await getActiveRuleSet(db)).rules);
	return rows.map(({ order, agent }) => {
		const a = byOrder.get(order.id);
		const r = a?.result;
		return {
			id: order.id,
			status: order.status,
			agent: { id: agent.id, code: agent.code, name: agent.name, agentClass: agent.agentClass },
			doseMg: order.doseMg,
			intervalH: order.intervalH,
			infusionH: order.infusionH,
			route: order.route,
			startAt: order.startAt.toISOString(),
			stoppedAt: order.stoppedAt?.toISOString() ?? null,
			restartedAt: order.restartedAt?.toISOString() ?? null,
			prescriberName: order.prescriberName,
			target: targetWindow(agent.params),
			latest:
				a && r
					? {
							id: a.id,
							at: new Date(a.at).toISOString(),
							complete: a.complete,
							missing: r.missing,
							crclMlMin: r.renal.crclMlMin,
							crclAtStartMlMin: r.renal.crclAtStartMlMin,
							halfLifeH: r.kinetics.now?.halfLifeH ?? null,
							halfLifeAtStartH: r.kinetics.atStart?.halfLifeH ?? null,
							peakMgL: r.kinetics.peakMgL,
							troughMgL: r.kinetics.troughMgL,
							auc24MgHL: r.kinetics.auc24MgHL,
							comparedToBand: compareDose({
								agent: agent.params,
								orderDailyDoseMg: r.dosing.dailyDoseMg,
								orderInfusionH: order.infusionH,
								referenceDailyDoseMg: r.dosing.bandDailyDoseMg,
								tolerance
							}).compared,
							proposed: r.dosing.proposed
						}
					: null
		};
	});
}

export type LabPoint = { at: string; value: number; unit: string };
export type RenalPoint = { at: string; crclMlMin: number | null; egfrIndexed: number | null; egfrMlMin: number | null };

const HISTORY_LIMIT = 500;

async function labHistory(patientId: string, analyte: 'creatinine' | 'albumin', db: DbOrTx): Promise<LabPoint[]> {
	const rows = await db
		.select({ at: labResults.observedAt, value: labResults.valueNormalised, unit: labResults.unitNormalised })
		.from(labResults)
		.where(and(eq(labResults.patientId, patientId), eq(labResults.analyte, analyte)))
		.orderBy(desc(labResults.observedAt))
		.limit(HISTORY_LIMIT);
	return rows.reverse().map((r) => ({ at: r.at.toISOString(), value: r.value, unit: r.unit }));
}

/** Renal function at each assessment time (orders assessed at the same moment share one point). */
async function renalHistory(patientId: string, db: DbOrTx): Promise<RenalPoint[]> {
	const rows = await db.execute<{ at: Date; crcl: number | null; egfrIndexed: number | null; egfrMlMin: number | null }>(sql`
		select * from (
			select distinct on (at) at, crcl_ml_min as crcl,
				(result #>> '{renal,egfrIndexed}')::float8 as "egfrIndexed",
				(result #>> '{renal,egfrMlMin}')::float8 as "egfrMlMin"
			from assessments where patient_id = ${patientId}
			order by at desc, created_at desc
			limit ${HISTORY_LIMIT}
		) latest order by at`);
	return [...rows].map((r) => ({ at: new Date(r.at).toISOString(), crclMlMin: r.crcl, egfrIndexed: r.egfrIndexed, egfrMlMin: r.egfrMlMin }));
}

async function flagHistory(patientId: string, db: DbOrTx): Promise<FlagHistoryItem[]> {
	const rows = await db
		.select({
			id: flags.id,
			state: flags.state,
			outcome: flags.outcome,
			severity: flags.severity,
			ruleKey: flags.ruleKey,
			finding: flags.finding,
			agentName: agents.name,
			openedAt: flags.openedAt,
			closedAt: flags.closedAt
		})
		.from(flags)
		.innerJoin(orders, eq(orders.id, flags.orderId))
		.innerJoin(agents, eq(agents.id, orders.agentId))
		.where(eq(flags.patientId, patientId))
		.orderBy(desc(flags.openedAt))
		.limit(200);
	return rows.map((r) => ({ ...r, openedAt: r.openedAt.toISOString(), closedAt: r.closedAt?.toISOString() ?? null }));
}

/** Everything the patient view shows, or null for an unknown patient. */
export async function getPatientDetail(patientId: string, db: DbOrTx = getDb()) {
	const summary = await patientSummary(patientId, db);
	if (!summary) return null;
	const [orderViews, creatinine, albumin, renal, flagItems] = await Promise.all([
		patientOrders(patientId, db),
		labHistory(patientId, 'creatinine', db),
		labHistory(patientId, 'albumin', db),
		renalHistory(patientId, db),
		flagHistory(patientId, db)
	]);
	return { patient: summary, orders: orderViews, labs: { creatinine, albumin }, renal, flags: flagItems };
}
export type PatientDetail = NonNullable<Awaited<ReturnType<typeof getPatientDetail>>>;

export type Projection = {
	orderId: string;
	agentName: string;
	route: string;
	assessedAt: string;
	hours: number;
	proposedFrom: 'typed' | 'assessment' | null;
	/** why the assessment proposes nothing, when it does not */
	proposalReason: string | null;
	/** cautions that fit the patient, from the assessment */
	cautions: string[];
	series: ProjectionSeries[];
	target: TargetWindow | null;
	/** individual: "kinetics now" are the patient's own, from measured levels; population: the population estimate */
	kineticsBasis: 'individual' | 'population';
	/** the order's measured levels and their fit (agents dosed from levels only), else null */
	levels: MeasuredLevelsView | null;
	caution: string;
	exampleParameters: string;
};

export type ProjectionResult = { ok: true; projection: Projection } | { ok: false; status: 404 | 422; error: string; field?: string };

/**
 * Current regimen against the proposed one (the assessment's, or one typed in) over 72 h from a first
 * dose, with the patient's kinetics now; the current regimen with the kinetics at order start shows
 * what changed.
 */
export async function projection(patientId: string, query: ProjectionQuery, db: DbOrTx = getDb()): Promise<ProjectionResult> {
	const [row] = await db
		.select({ order: orders, agentName: agents.name, params: agents.params })
		.from(orders)
		.innerJoin(agents, eq(agents.id, orders.agentId))
		.where(and(eq(orders.id, query.order), eq(orders.patientId, patientId)));
	if (!row) return { ok: false, status: 404, error: 'This patient has no order with that id.', field: 'order' };
	if (row.order.route !== 'iv') {
		return { ok: false, status: 422, error: 'The projection is drawn for intravenous orders only.', field: 'order' };
	}
	const [latest] = await db
		.select({ at: assessments.at, result: assessments.result })
		.from(assessments)
		.where(eq(assessments.orderId, row.order.id))
		.orderBy(desc(assessments.at), desc(assessments.createdAt))
		.limit(1);
	if (!latest) return { ok: false, status: 422, error: 'This order has not been assessed yet.', field: 'order' };
	const kinetics = latest.result.kinetics;
	// with measured levels, the patient's own kinetics (fitted now, from the stored doses and levels) replace
	// the population estimate, and the proposal is the one to the target from them
	const levels = await measuredLevelsOf(row.order, row.params, latest.result, db);
	const individual = levels?.basis === 'individual' ? levels.individual : null;
	const now: KineticsSnapshot | null = individual ?? kinetics.now;
	if (!now) {
		const missing = latest.result.missing.length ? ` (missing: ${latest.result.missing.join(', ')})` : '';
		return { ok: false, status: 422, error: `The latest assessment has no kinetic estimate${missing}.`, field: 'order' };
	}
	const basisProposal = individual ? levels!.proposal : latest.result.dosing.proposed;
	const basisProposalReason = individual
		? (levels!.proposalReason ?? 'the individual kinetics give no regimen')
		: (latest.result.dosing.proposalReason ?? null);
	const current: RegimenInput = { doseMg: row.order.doseMg, intervalH: row.order.intervalH, infusionH: row.order.infusionH };
	let proposed: RegimenInput | null = null;
	let proposedFrom: Projection['proposedFrom'] = null;
	if (query.dose !== undefined && query.interval !== undefined) {
		proposed = { doseMg: query.dose, intervalH: query.interval, infusionH: query.infusion ?? row.order.infusionH };
		if (proposed.infusionH > proposed.intervalH) {
			return { ok: false, status: 422, error: 'The infusion time must not exceed the interval.', field: 'infusion' };
		}
		proposedFrom = 'typed';
	} else if (basisProposal) {
		const p = basisProposal;
		proposed = { doseMg: p.doseMg, intervalH: p.intervalH, infusionH: p.infusionH };
		proposedFrom = 'assessment';
	}
	const series: ProjectionSeries[] = [];
	if (kinetics.atStart) series.push(projectSeries('start', 'Current regimen, kinetics at order start', current, kinetics.atStart));
	const nowLabel = individual ? 'own kinetics from levels' : 'kinetics now';
	series.push(projectSeries('current', `Current regimen, ${nowLabel}`, current, now));
	if (proposed) series.push(projectSeries('proposed', `${proposedFrom === 'typed' ? 'Typed-in' : 'Proposed'} regimen, ${nowLabel}`, proposed, now));
	return {
		ok: true,
		projection: {
			orderId: row.order.id,
			agentName: row.agentName,
			route: row.order.route,
			assessedAt: new Date(latest.at).toISOString(),
			hours: PROJECTION_HOURS,
			proposedFrom,
			proposalReason: basisProposal ? null : basisProposalReason,
			cautions: latest.result.dosing.cautions ?? [],
			series,
			target: targetWindow(row.params),
			kineticsBasis: individual ? 'individual' : 'population',
			levels,
			caution: PROPOSAL_CAUTION,
			exampleParameters: EXAMPLE_PARAMETERS_NOTE
		}
	};
}

/** True when a patient with this id exists (form actions check before they write). */
export async function exists(patientId: string, db: DbOrTx = getDb()): Promise<boolean> {
	const [row] = await db.select({ id: patients.id }).from(patients).where(eq(patients.id, patientId)).limit(1);
	return row !== undefined;
}

/**
 * Whether a user may read a patient. Pharmacists and administrators work the whole hospital; a
 * physician sees only patients they prescribed for (by their account or the prescriber directory) or
 * who have a recommendation addressed to them. Anyone else gets "no such patient", which reveals
 * nothing about who is in the hospital.
 */
export async function visibleTo(user: { id: string; email: string; role: string }, patientId: string, db: DbOrTx = getDb()): Promise<boolean> {
	if (user.role === 'pharmacist' || user.role === 'admin') return true;
	if (user.role !== 'physician') return false;
	const [row] = Array.from(
		(await db.execute(sql`
			select exists (
				select 1 from orders o left join prescribers pr on pr.id = o.practitioner_id
				where o.patient_id = ${patientId}::uuid
					and (o.prescriber_id = ${user.id}::uuid or pr.user_id = ${user.id}::uuid or lower(pr.email) = lower(${user.email}))
			) or exists (
				select 1 from recommendations r join flags f on f.id = r.flag_id
				where f.patient_id = ${patientId}::uuid
					and (r.physician_id = ${user.id}::uuid or lower(r.recipient_email) = lower(${user.email}))
			) as visible`)) as Iterable<{ visible: boolean }>
	);
	return row?.visible === true;
}
