// Facts: the flat, named values a rule can test, built from one assessment, the agent's parameters and
// the order. Pure; relative imports only (conventions.md §1). Every number carries its unit in its name.
import { completeAgent } from '../clinical/agent-params';
import { weightForBasis, type BodySize } from '../clinical/patient-state';
import { compareDose, isRenallyAdjusted, selectReference, usualMaximumDailyMg, USUAL_MAX_MARGIN } from '../clinical/reference-regimen';
import { therapyDay } from '../clinical/timeline';
import type { AgentParams, Assessment, PopulationModel, RenalReplacementMode, Route, TraceStep, WeightBasis } from '../clinical/types';

const HOUR_MS = 3_600_000;

export type FactType = 'number' | 'integer' | 'boolean' | 'string';

export type FactSpec = {
	type: FactType;
	/** UCUM-style unit, '1' for a ratio or count, 'fraction' for 0..1 shown as a percentage, '' for text */
	unit: string;
	meaning: string;
	/** true when the fact may be null (not computed, missing input) */
	nullable: boolean;
};

/**
 * The facts schema: every variable a rule's JSON Logic or finding text may name. A variable not listed
 * here is rejected by name when a rule is saved. Thresholds are not facts: they are the rule's named
 * parameters, read as `params.<name>`.
 */
export const FACTS_SCHEMA = {
	agentCode: { type: 'string', unit: '', meaning: 'ATC code of the agent', nullable: false },
	agentName: { type: 'string', unit: '', meaning: 'name of the agent', nullable: false },
	agentClass: { type: 'string', unit: '', meaning: 'class of the agent, e.g. aminoglycoside', nullable: false },
	model: { type: 'string', unit: '', meaning: "population model: 'generic', 'vancomycin' or 'aminoglycoside'", nullable: false },
	fe: { type: 'number', unit: 'fraction', meaning: 'fraction of the agent excreted unchanged in urine (agent library)', nullable: false },
	proteinBinding: { type: 'number', unit: 'fraction', meaning: 'plasma protein binding at the reference albumin (agent library)', nullable: false },
	nephrotoxic: { type: 'boolean', unit: '', meaning: 'the agent is nephrotoxic (agent library)', nullable: false },
	renallyAdjusted: { type: 'boolean', unit: '', meaning: "the agent's dose depends on renal function (agent library: its bands differ)", nullable: false },
	agentCreatinineMaxAgeH: { type: 'number', unit: 'h', meaning: "the agent's own limit on the age of a creatinine result (agent library)", nullable: false },
	systemic: { type: 'boolean', unit: '', meaning: 'the order is absorbed systemically by its route (false for oral vancomycin)', nullable: false },
	renalReplacement: { type: 'string', unit: '', meaning: "renal replacement therapy in force: 'ihd', 'pd', 'crrt', or null", nullable: true },
	dayOfTherapy: { type: 'integer', unit: '1', meaning: 'day of therapy (day 1 = the first 24 h from the first dose)', nullable: false },
	troughMaxMgL: { type: 'number', unit: 'mg/L', meaning: "the agent's trough limit (agent library), null when it has none", nullable: true },
	route: { type: 'string', unit: '', meaning: "route of the order: 'iv', 'po' or 'im'", nullable: false },
	doseMg: { type: 'number', unit: 'mg', meaning: 'dose per administration of the order', nullable: false },
	intervalH: { type: 'number', unit: 'h', meaning: 'dosing interval of the order', nullable: false },
	dailyDoseMg: { type: 'number', unit: 'mg/d', meaning: 'daily dose of the order (dose × 24 / interval)', nullable: false },
	orderAgeH: { type: 'number', unit: 'h', meaning: "time from the order's start to the assessment", nullable: false },
	creatinineMgDl: { type: 'number', unit: 'mg/dL', meaning: 'latest serum creatinine at or before the assessment', nullable: true },
	creatinineAgeH: { type: 'number', unit: 'h', meaning: 'age of the latest creatinine result at the assessment; null when there is none', nullable: true },
	creatinineBaselineMgDl: { type: 'number', unit: 'mg/dL', meaning: 'baseline creatinine (lowest in the previous 7 days)', nullable: true },
	creatinineRise48hMgDl: { type: 'number', unit: 'mg/dL', meaning: 'largest creatinine rise within any 48 h of the last 7 days', nullable: true },
	creatinineFall48hMgDl: { type: 'number', unit: 'mg/dL', meaning: 'largest creatinine fall within any 48 h of the last 7 days', nullable: true },
	creatinineStable: { type: 'boolean', unit: '', meaning: 'KDIGO stage 0 and no rise or fall ≥ 0.3 mg/dL within 48 h (clinical core)', nullable: false },
	kdigoStage: { type: 'integer', unit: '{stage}', meaning: 'KDIGO AKI stage by creatinine, 0–3', nullable: false },
	crclMlMin: { type: 'number', unit: 'mL/min', meaning: 'creatinine clearance now (Cockcroft–Gault, dosing weight)', nullable: true },
	crclAtStartMlMin: { type: 'number', unit: 'mL/min', meaning: "creatinine clearance at the order's start", nullable: true },
	crclRatio: { type: 'number', unit: '×', meaning: 'CrCl now / CrCl at the start', nullable: true },
	egfrMlMin: { type: 'number', unit: 'mL/min', meaning: 'eGFR (CKD-EPI 2021) de-indexed with BSA', nullable: true },
	egfrIndexedMlMinPer173M2: { type: 'number', unit: 'mL/min/1.73 m²', meaning: 'eGFR (CKD-EPI 2021) as reported, indexed to 1.73 m²', nullable: true },
	kineticGfrMlMin: { type: 'number', unit: 'mL/min', meaning: 'kinetic GFR while creatinine is changing', nullable: true },
	dosingCrclMlMin: {
		type: 'number',
		unit: 'mL/min',
		meaning: 'the CrCl doses are based on (the lower of Cockcroft–Gault and kinetic GFR while creatinine changes; null on dialysis)',
		nullable: true
	},
	arc: { type: 'boolean', unit: '', meaning: 'possible augmented renal clearance as the clinical core marks it (CrCl ≥ 130 mL/min)', nullable: false },
	albuminGL: { type: 'number', unit: 'g/L', meaning: 'latest serum albumin at or before the assessment', nullable: true },
	albuminAgeH: { type: 'number', unit: 'h', meaning: 'age of the latest albumin result at the assessment', nullable: true },
	unboundFraction: {
		type: 'number',
		unit: 'fraction',
		meaning: 'unbound fraction at the current albumin (null when albumin is missing or old)',
		nullable: true
	},
	halfLifeH: { type: 'number', unit: 'h', meaning: 'expected half-life now', nullable: true },
	halfLifeAtStartH: { type: 'number', unit: 'h', meaning: "expected half-life at the order's start", nullable: true },
	halfLifeRatio: { type: 'number', unit: '×', meaning: 'expected half-life now / at the start', nullable: true },
	halfLifeRatioRenal: {
		type: 'number',
		unit: '×',
		meaning: 'the same ratio at the reference albumin: the change renal function alone explains',
		nullable: true
	},
	clearanceLPerH: { type: 'number', unit: 'L/h', meaning: 'drug clearance now', nullable: true },
	volumeL: { type: 'number', unit: 'L', meaning: 'volume of distribution now', nullable: true },
	peakMgL: { type: 'number', unit: 'mg/L', meaning: 'predicted steady-state peak of the current regimen', nullable: true },
	troughMgL: { type: 'number', unit: 'mg/L', meaning: 'predicted steady-state trough of the current regimen', nullable: true },
	auc24MgHL: { type: 'number', unit: 'mg·h/L', meaning: 'predicted steady-state AUC over 24 h of the current regimen', nullable: true },
	bandLabel: {
		type: 'string',
		unit: '',
		meaning: "the regimen the order is held against: its CrCl band, indication or dialysis regimen, e.g. 'CrCl 20–39 mL/min'",
		nullable: true
	},
	bandDailyDoseMg: { type: 'number', unit: 'mg/d', meaning: 'daily dose of that regimen (null when it fixes no dose)', nullable: true },
	doseBandRatio: { type: 'number', unit: '×', meaning: 'daily dose / that regimen’s daily dose (1 inside an extended-infusion window)', nullable: true },
	doseVsBand: { type: 'string', unit: '', meaning: "'above', 'within', 'below' (±20 %) or 'unknown'", nullable: false },
	referenceUnadjusted: { type: 'boolean', unit: '', meaning: 'that regimen is the agent’s full one: renal function calls for no reduction', nullable: false },
	regimenStatus: {
		type: 'string',
		unit: '',
		meaning:
			"'regimen' (the library has one for today), 'auc-guided', 'level-guided', 'avoid' (not recommended), 'none' (no regimen for this renal function) or 'not-applicable' (route not absorbed, no regimen for the route, no renal function)",
		nullable: false
	},
	regimenReason: { type: 'string', unit: '', meaning: 'why the library has no regimen for today, in words', nullable: true },
	fullDoseRatio: { type: 'number', unit: '×', meaning: "daily dose / the agent's full (top-band) daily dose", nullable: true },
	usualMaxDailyDoseMg: { type: 'number', unit: 'mg/d', meaning: 'usual maximum daily dose (route, agent, or the indication’s own regimen)', nullable: true },
	aboveUsualMax: { type: 'boolean', unit: '', meaning: 'daily dose above the usual maximum', nullable: false },
	proposedDoseMg: { type: 'number', unit: 'mg', meaning: 'dose per administration of the proposed regimen', nullable: true },
	proposedIntervalH: { type: 'number', unit: 'h', meaning: 'interval of the proposed regimen', nullable: true },
	weightBasis: { type: 'string', unit: '', meaning: "weight used for CrCl: 'actual', 'ideal' or 'adjusted'", nullable: true },
	dosedByLevels: {
		type: 'boolean',
		unit: '',
		meaning: 'the agent is dosed from measured levels: vancomycin by AUC24, aminoglycosides by peak and trough (agent library)',
		nullable: false
	},
	measuredLevelCount: {
		type: 'integer',
		unit: '1',
		meaning: 'levels of the agent drawn while the order ran; null when the assessment did not look at levels',
		nullable: true
	},
	measuredTroughMgL: {
		type: 'number',
		unit: 'mg/L',
		meaning: 'latest measured level labelled trough, drawn after a dose and not during an infusion',
		nullable: true
	},
	measuredTroughAgeH: { type: 'number', unit: 'h', meaning: 'age of that trough at the assessment', nullable: true },
	measuredTroughPredictedMgL: {
		type: 'number',
		unit: 'mg/L',
		meaning: 'the population prediction for the time of that trough (doses in the history, population kinetics now)',
		nullable: true
	},
	measuredTroughRatio: { type: 'number', unit: '×', meaning: 'measured trough / its population prediction', nullable: true },
	measuredAuc24MgHL: {
		type: 'number',
		unit: 'mg·h/L',
		meaning: 'steady-state AUC24 of the current regimen from the individual (MAP) clearance fitted to measured vancomycin levels',
		nullable: true
	},
	measuredClearanceLPerH: { type: 'number', unit: 'L/h', meaning: 'individual clearance from measured levels', nullable: true },
	complete: { type: 'boolean', unit: '', meaning: 'every input of the assessment was present and fresh', nullable: false },
	missingCount: { type: 'integer', unit: '1', meaning: 'number of missing or stale inputs', nullable: false }
} as const satisfies Record<string, FactSpec>;

export type FactName = keyof typeof FACTS_SCHEMA;
export const FACT_NAMES = Object.keys(FACTS_SCHEMA) as FactName[];

export type Facts = {
	agentCode: string;
	agentName: string;
	agentClass: string;
	model: PopulationModel;
	fe: number;
	proteinBinding: number;
	nephrotoxic: boolean;
	renallyAdjusted: boolean;
	agentCreatinineMaxAgeH: number;
	systemic: boolean;
	renalReplacement: RenalReplacementMode | null;
	dayOfTherapy: number;
	troughMaxMgL: number | null;
	route: string;
	doseMg: number;
	intervalH: number;
	dailyDoseMg: number;
	orderAgeH: number;
	creatinineMgDl: number | null;
	creatinineAgeH: number | null;
	creatinineBaselineMgDl: number | null;
	creatinineRise48hMgDl: number | null;
	creatinineFall48hMgDl: number | null;
	creatinineStable: boolean;
	kdigoStage: number;
	crclMlMin: number | null;
	crclAtStartMlMin: number | null;
	crclRatio: number | null;
	egfrMlMin: number | null;
	egfrIndexedMlMinPer173M2: number | null;
	kineticGfrMlMin: number | null;
	dosingCrclMlMin: number | null;
	arc: boolean;
	albuminGL: number | null;
	albuminAgeH: number | null;
	unboundFraction: number | null;
	halfLifeH: number | null;
	halfLifeAtStartH: number | null;
	halfLifeRatio: number | null;
	halfLifeRatioRenal: number | null;
	clearanceLPerH: number | null;
	volumeL: number | null;
	peakMgL: number | null;
	troughMgL: number | null;
	auc24MgHL: number | null;
	bandLabel: string | null;
	bandDailyDoseMg: number | null;
	doseBandRatio: number | null;
	doseVsBand: 'above' | 'within' | 'below' | 'unknown';
	referenceUnadjusted: boolean;
	regimenStatus: RegimenStatus;
	regimenReason: string | null;
	fullDoseRatio: number | null;
	usualMaxDailyDoseMg: number | null;
	aboveUsualMax: boolean;
	proposedDoseMg: number | null;
	proposedIntervalH: number | null;
	weightBasis: WeightBasis | null;
	dosedByLevels: boolean;
	measuredLevelCount: number | null;
	measuredTroughMgL: number | null;
	measuredTroughAgeH: number | null;
	measuredTroughPredictedMgL: number | null;
	measuredTroughRatio: number | null;
	measuredAuc24MgHL: number | null;
	measuredClearanceLPerH: number | null;
	complete: boolean;
	missingCount: number;
};

/** The assessment as stored (JSON: dates may be ISO strings), with its trace when the caller has it. */
export type AssessmentLike = Omit<Assessment, 'trace' | 'at' | 'creatinine' | 'albumin' | 'measured'> & {
	at: Date | string;
	// fallWithin48hMgDl: read when the clinical core records it with the assessment; otherwise the
	// value comes from the trace (reading a stored trace costs far more than the result itself)
	creatinine: Omit<Assessment['creatinine'], 'latestAt'> & { latestAt: Date | string | null; fallWithin48hMgDl?: number | null };
	albumin: Omit<Assessment['albumin'], 'latestAt'> & { latestAt: Date | string | null };
	trace?: readonly Pick<TraceStep, 'key' | 'inputs'>[];
	/** only what the facts read of the measured-level section (stored dates are ISO strings) */
	measured?: {
		levelCount: number;
		latestLevelAt?: Date | string | null;
		individual: Assessment['kinetics']['now'];
		auc24MgHL: number | null;
		latestTrough: { at: Date | string; mgL: number; populationMgL: number | null } | null;
	};
};

export type RegimenStatus = 'regimen' | 'auc-guided' | 'level-guided' | 'avoid' | 'none' | 'not-applicable';

export type FactsInput = {
	assessment: AssessmentLike;
	agent: { code: string; name: string; agentClass: string; params: AgentParams };
	order: { doseMg: number; intervalH: number; infusionH?: number; route: string; startAt: Date | string; firstDoseAt?: Date | string | null };
	/** the rule set's tolerance around a regimen's daily dose (see bandToleranceOf); default ±20 % */
	bandTolerance?: number;
};

const ms = (d: Date | string) => (d instanceof Date ? d.getTime() : Date.parse(d));
const finiteOrNull = (v: number | null | undefined): number | null => (typeof v === 'number' && Number.isFinite(v) ? v : null);

/** The largest 48-h creatinine fall is recorded only in the trace (step "creatinineStable"). */
function fallWithin48hMgDl(trace: AssessmentLike['trace']): number | null {
	if (!trace) return null;
	const step = trace.find((s) => s.key === 'creatinineStable');
	const input = step?.inputs.find((i) => i.name === 'largest fall within 48 h');
	return typeof input?.value === 'number' ? input.value : null;
}

/** The stored covariates as the body size weightForBasis() reads (the same choice as assess()). */
function bodyFrom(c: Assessment['covariates']): BodySize {
	return {
		heightCm: c.heightCm,
		weightKg: c.weightKg,
		idealKg: c.idealBodyWeightKg,
		adjustedKg: c.adjustedBodyWeightKg,
		dosingKg: c.dosingWeightKg,
		weightBasis: c.weightBasis,
		bsaM2: c.bsaM2,
		devineInRange: null,
		obese: null
	};
}

const asDate = (d: Date | string) => (d instanceof Date ? d : new Date(d));

type MeasuredFacts = Pick<
	Facts,
	| 'measuredLevelCount'
	| 'measuredTroughMgL'
	| 'measuredTroughAgeH'
	| 'measuredTroughPredictedMgL'
	| 'measuredTroughRatio'
	| 'measuredAuc24MgHL'
	| 'measuredClearanceLPerH'
>;

/** The measured-level facts; all null for an assessment that did not look at levels (other agents, older rows). */
function measuredFacts(m: AssessmentLike['measured'], atMs: number): MeasuredFacts {
	const trough = m?.latestTrough ?? null;
	const troughMgL = trough === null ? null : finiteOrNull(trough.mgL);
	const predicted = trough === null ? null : finiteOrNull(trough.populationMgL);
	return {
		measuredLevelCount: m === undefined ? null : m.levelCount,
		measuredTroughMgL: troughMgL,
		measuredTroughAgeH: trough === null ? null : (atMs - ms(trough.at)) / HOUR_MS,
		measuredTroughPredictedMgL: predicted,
		measuredTroughRatio: troughMgL !== null && predicted !== null && predicted > 0 ? troughMgL / predicted : null,
		measuredAuc24MgHL: finiteOrNull(m?.auc24MgHL),
		measuredClearanceLPerH: m?.individual ? finiteOrNull(m.individual.clearanceLPerH) : null
	};
}

/**
 * Facts for one assessment. Agent-derived facts (fe, binding, trough limit, renal band) come from the
 * agent parameters passed in — the library as it is now — so that an edit to the library is reflected
 * when the rules are replayed over stored assessments; kinetics come from the assessment.
 */
export function buildFacts(input: FactsInput): Facts {
	const { assessment: a, agent, order } = input;
	const p = agent.params;
	const atMs = ms(a.at);
	const dailyDoseMg = (order.doseMg * 24) / order.intervalH;

	const crclMlMin = finiteOrNull(a.renal.crclMlMin);
	const crclAtStartMlMin = finiteOrNull(a.renal.crclAtStartMlMin);
	// the regimen the order is held against, chosen by the same code as assess() with the library as it is now
	const params = completeAgent(p);
	const renalReplacement = a.renal.renalReplacement ?? null;
	// an assessment stored before the dosing CrCl was kept used Cockcroft–Gault
	const dosingCrclMlMin = a.renal.dosingCrclMlMin !== undefined ? finiteOrNull(a.renal.dosingCrclMlMin) : renalReplacement === null ? crclMlMin : null;
	const route = order.route as Route;
	const dayOfTherapy =
		a.therapy?.dayOfTherapy ??
		therapyDay(
			{
				doseMg: order.doseMg,
				intervalH: order.intervalH,
				infusionH: order.infusionH ?? 0,
				route,
				startAt: asDate(order.startAt),
				firstDoseAt: order.firstDoseAt == null ? null : asDate(order.firstDoseAt)
			},
			atMs
		).dayOfTherapy;
	const weightKg = weightForBasis(params.vdWeightBasis, bodyFrom(a.covariates));
	const selected = selectReference({
		agent: params,
		route,
		dosingCrclMlMin,
		renalReplacement,
		dayOfTherapy,
		weightKg,
		orderDailyDoseMg: dailyDoseMg,
		orderInfusionH: order.infusionH ?? 0
	});
	const ref = selected.reference;
	const systemic = selected.routeParams !== null && selected.routeParams.systemic;
	const comparison = compareDose({
		agent: params,
		orderDailyDoseMg: dailyDoseMg,
		orderInfusionH: order.infusionH ?? 0,
		referenceDailyDoseMg: ref?.dailyDoseMg ?? null,
		tolerance: input.bandTolerance
	});
	const bandDailyDoseMg = ref?.dailyDoseMg ?? null;
	let regimenStatus: RegimenStatus;
	if (!systemic || selected.reasonKind === 'route' || selected.reasonKind === 'weight' || selected.reasonKind === 'no-renal-function')
		regimenStatus = 'not-applicable';
	else if (ref === null) regimenStatus = 'none';
	else if (ref.avoid) regimenStatus = 'avoid';
	else if (ref.aucGuided) regimenStatus = 'auc-guided';
	else if (ref.levelGuided) regimenStatus = 'level-guided';
	else if (ref.dailyDoseMg === null) regimenStatus = 'not-applicable';
	else regimenStatus = 'regimen';
	// a full dose is measured against the full regimen of the family the order's dose points at (default or indication)
	const topDailyMg = ref?.topDailyDoseMg ?? selected.familyTopDailyDoseMg;
	const usualMaxDailyDoseMg = systemic ? usualMaximumDailyMg(params, selected.routeParams, weightKg, ref) : null;

	const now = a.kinetics.now;
	const atStart = a.kinetics.atStart;
	const creatinineAgeH = finiteOrNull(a.creatinine.ageH) ?? (a.creatinine.latestAt === null ? null : (atMs - ms(a.creatinine.latestAt)) / HOUR_MS);
	const albuminAgeH = a.albumin.latestAt === null ? null : (atMs - ms(a.albumin.latestAt)) / HOUR_MS;

	return {
		agentCode: agent.code,
		agentName: agent.name,
		agentClass: agent.agentClass,
		model: p.model,
		fe: p.fe,
		proteinBinding: p.proteinBinding,
		nephrotoxic: p.nephrotoxic,
		renallyAdjusted: isRenallyAdjusted(params),
		agentCreatinineMaxAgeH: p.maxCreatinineAgeH,
		systemic,
		renalReplacement,
		dayOfTherapy,
		troughMaxMgL: p.troughMaxMgL,
		route: order.route,
		doseMg: order.doseMg,
		intervalH: order.intervalH,
		dailyDoseMg,
		orderAgeH: Math.max(0, (atMs - ms(order.startAt)) / HOUR_MS),
		creatinineMgDl: finiteOrNull(a.creatinine.latestMgDl),
		creatinineAgeH,
		creatinineBaselineMgDl: finiteOrNull(a.creatinine.baselineMgDl),
		creatinineRise48hMgDl: finiteOrNull(a.creatinine.riseWithin48hMgDl),
		creatinineFall48hMgDl:
			a.creatinine.riseWithin48hMgDl === null
				? null
				: a.creatinine.fallWithin48hMgDl !== undefined && a.creatinine.fallWithin48hMgDl !== null
					? finiteOrNull(a.creatinine.fallWithin48hMgDl)
					: fallWithin48hMgDl(a.trace),
		creatinineStable: a.creatinine.stable,
		kdigoStage: a.renal.kdigoStage,
		crclMlMin,
		crclAtStartMlMin,
		crclRatio: crclMlMin !== null && crclAtStartMlMin !== null && crclAtStartMlMin > 0 ? crclMlMin / crclAtStartMlMin : null,
		egfrMlMin: finiteOrNull(a.renal.egfrMlMin),
		egfrIndexedMlMinPer173M2: finiteOrNull(a.renal.egfrIndexed),
		kineticGfrMlMin: finiteOrNull(a.renal.kineticGfrMlMin),
		dosingCrclMlMin,
		arc: a.renal.arc,
		albuminGL: finiteOrNull(a.albumin.latestGL),
		albuminAgeH,
		unboundFraction: finiteOrNull(a.albumin.unboundFraction),
		halfLifeH: now === null ? null : finiteOrNull(now.halfLifeH),
		halfLifeAtStartH: atStart === null ? null : finiteOrNull(atStart.halfLifeH),
		halfLifeRatio: finiteOrNull(a.kinetics.halfLifeRatio),
		halfLifeRatioRenal: a.kinetics.halfLifeRatioRenal === undefined ? finiteOrNull(a.kinetics.halfLifeRatio) : finiteOrNull(a.kinetics.halfLifeRatioRenal),
		clearanceLPerH: now === null ? null : finiteOrNull(now.clearanceLPerH),
		volumeL: now === null ? null : finiteOrNull(now.volumeL),
		peakMgL: finiteOrNull(a.kinetics.peakMgL),
		troughMgL: finiteOrNull(a.kinetics.troughMgL),
		auc24MgHL: finiteOrNull(a.kinetics.auc24MgHL),
		bandLabel: ref?.label ?? null,
		bandDailyDoseMg,
		doseBandRatio: comparison.ratio,
		doseVsBand: comparison.compared,
		referenceUnadjusted: ref?.unadjusted ?? false,
		regimenStatus,
		regimenReason: ref !== null && regimenStatus === 'regimen' ? null : selected.reason,
		fullDoseRatio: topDailyMg !== null && topDailyMg > 0 ? dailyDoseMg / topDailyMg : null,
		usualMaxDailyDoseMg,
		aboveUsualMax: usualMaxDailyDoseMg !== null && dailyDoseMg > usualMaxDailyDoseMg * USUAL_MAX_MARGIN,
		proposedDoseMg: a.dosing.proposed === null ? null : a.dosing.proposed.doseMg,
		proposedIntervalH: a.dosing.proposed === null ? null : a.dosing.proposed.intervalH,
		weightBasis: a.covariates.weightBasis,
		dosedByLevels: p.model === 'vancomycin' || p.model === 'aminoglycoside',
		...measuredFacts(a.measured, atMs),
		complete: a.complete,
		missingCount: a.missing.length
	};
}
