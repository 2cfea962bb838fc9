// assess(): the whole re-estimate for one order at one point in time, with its calculation trace.
// Pure and synchronous; numbers are never formatted here (the UI formats them).
import { chooseDosingWeight, devineInRange, DEFAULT_OBESE_RATIO, ADJUSTED_WEIGHT_FACTOR } from './body-size';
import {
	ClinicalInputError,
	requireAdultAge,
	requireDate,
	requireFraction,
	requireNonNegative,
	requirePositive,
	requireSex
} from './errors';
import { AKI_RISE_MG_DL, scanCreatinine } from './aki';
import {
	albuminAdjustedKineticsRaw,
	DEFAULT_ALBUMIN_REF_G_L,
	HIGHLY_BOUND_THRESHOLD,
	MAX_FU_RATIO,
	unboundFractionRaw
} from './albumin';
import { steadyStateInfusionRaw, vancomycinClearanceLPerH, AMINOGLYCOSIDE_K_INTERCEPT, AMINOGLYCOSIDE_K_SLOPE } from './kinetics';
import {
	bandDoseMg,
	bandHasRegimen,
	bandLabel,
	compareDailyDose,
	DEFAULT_BAND_TOLERANCE,
	DEFAULT_CRCL_NORMAL_ML_MIN,
	findBand,
	renalAdjustmentFactorRaw,
	roundDoseMg,
	roundIntervalH
} from './regimen';
import {
	ARC_THRESHOLD_ML_MIN,
	CREATININE_WATER_L_PER_KG,
	ckdEpi2021Raw,
	cockcroftGaultRaw,
	creatinineMaxRisePerDayRaw,
	kineticGfrRaw
} from './renal-function';
import { completedYearsRaw, utcYmd, ymdString } from './age';
import { input, PROPOSAL_CAUTION, SOURCES, step } from './trace';
import { CM_PER_INCH, CREATININE_UMOL_L_PER_MG_DL } from './units';
import type {
	AgentParams,
	AssessInput,
	AssessSettings,
	Assessment,
	Creatinine,
	DoseBand,
	KineticsSnapshot,
	ProposedRegimen,
	TraceStep,
	WeightBasis
} from './types';

const HOUR_MS = 3_600_000;
export const DEFAULT_MAX_ALBUMIN_AGE_H = 168;
/** how long after the order start a first result may stand in for the value at the start (common practice) */
export const START_GRACE_H = 24;
/** minimum spacing of the two creatinine results used for kinetic GFR (common practice) */
export const KINETIC_GFR_MIN_INTERVAL_H = 6;
const EPS = 1e-9;

const validatedAgents = new WeakSet<AgentParams>();

/** Agent parameters are checked once per object (agents are loaded once and reused across many orders). */
function validateAgent(agent: AgentParams): void {
	if (validatedAgents.has(agent)) return;
	if (agent == null || typeof agent !== 'object') throw new ClinicalInputError('agent', agent, 'must be an object');
	requireFraction('agent.fe', agent.fe);
	requireFraction('agent.proteinBinding', agent.proteinBinding);
	if (agent.proteinBinding >= 1) throw new ClinicalInputError('agent.proteinBinding', agent.proteinBinding, 'must be < 1');
	requirePositive('agent.albuminRefGL', agent.albuminRefGL);
	requirePositive('agent.vdLPerKg', agent.vdLPerKg);
	if (!['actual', 'ideal', 'adjusted', 'dosing'].includes(agent.vdWeightBasis)) {
		throw new ClinicalInputError('agent.vdWeightBasis', agent.vdWeightBasis, "must be 'actual', 'ideal', 'adjusted' or 'dosing'");
	}
	requirePositive('agent.halfLifeNormalH', agent.halfLifeNormalH);
	if (!['generic', 'vancomycin', 'aminoglycoside'].includes(agent.model)) {
		throw new ClinicalInputError('agent.model', agent.model, "must be 'generic', 'vancomycin' or 'aminoglycoside'");
	}
	if (agent.usualDoseMg !== null) requirePositive('agent.usualDoseMg', agent.usualDoseMg);
	if (agent.usualDoseMgPerKg !== null) requirePositive('agent.usualDoseMgPerKg', agent.usualDoseMgPerKg);
	requirePositive('agent.usualIntervalH', agent.usualIntervalH);
	requireNonNegative('agent.usualInfusionH', agent.usualInfusionH);
	if (!Array.isArray(agent.renalBands)) throw new ClinicalInputError('agent.renalBands', agent.renalBands, 'must be an array');
	agent.renalBands.forEach((b, i) => {
		if (b.minCrclMlMin !== null) requireNonNegative(`agent.renalBands[${i}].minCrclMlMin`, b.minCrclMlMin);
		if (b.maxCrclMlMin !== null) requirePositive(`agent.renalBands[${i}].maxCrclMlMin`, b.maxCrclMlMin);
		if (b.minCrclMlMin !== null && b.maxCrclMlMin !== null && b.maxCrclMlMin <= b.minCrclMlMin) {
			throw new ClinicalInputError(`agent.renalBands[${i}].maxCrclMlMin`, b.maxCrclMlMin, 'must exceed minCrclMlMin');
		}
		if (b.doseMg !== null) requirePositive(`agent.renalBands[${i}].doseMg`, b.doseMg);
		if (b.doseMgPerKg !== null) requirePositive(`agent.renalBands[${i}].doseMgPerKg`, b.doseMgPerKg);
		if (b.intervalH !== null) requirePositive(`agent.renalBands[${i}].intervalH`, b.intervalH);
	});
	if (agent.adjustBy !== 'dose' && agent.adjustBy !== 'interval') {
		throw new ClinicalInputError('agent.adjustBy', agent.adjustBy, "must be 'dose' or 'interval'");
	}
	if (agent.troughMaxMgL !== null) requirePositive('agent.troughMaxMgL', agent.troughMaxMgL);
	if (agent.aucTargetMgHL !== null) {
		const [lo, hi] = agent.aucTargetMgHL;
		requirePositive('agent.aucTargetMgHL[0]', lo);
		requirePositive('agent.aucTargetMgHL[1]', hi);
		if (hi < lo) throw new ClinicalInputError('agent.aucTargetMgHL[1]', hi, 'must be ≥ aucTargetMgHL[0]');
	}
	if (agent.loadingTargetMgL !== null) requirePositive('agent.loadingTargetMgL', agent.loadingTargetMgL);
	requirePositive('agent.maxCreatinineAgeH', agent.maxCreatinineAgeH);
	requireFraction('agent.bioavailability', agent.bioavailability);
	validatedAgents.add(agent);
}

type Timed = { at: Date };

/** Latest entry at or before tMs (entries need not be sorted). */
function latestAtOrBefore<T extends Timed>(list: readonly T[], tMs: number, name: string): T | null {
	let best: T | null = null;
	let bestMs = -Infinity;
	for (let i = 0; i < list.length; i++) {
		const item = list[i];
		const ms = item.at instanceof Date ? item.at.getTime() : NaN;
		if (Number.isNaN(ms)) throw new ClinicalInputError(`${name}[${i}].at`, item.at, 'must be a valid Date');
		if (ms <= tMs && ms >= bestMs) {
			best = item;
			bestMs = ms;
		}
	}
	return best;
}

/** Earliest entry in (fromMs, toMs]. */
function earliestWithin<T extends Timed>(list: readonly T[], fromMs: number, toMs: number): T | null {
	let best: T | null = null;
	let bestMs = Infinity;
	for (let i = 0; i < list.length; i++) {
		const ms = list[i].at.getTime();
		if (ms > fromMs && ms <= toMs && ms < bestMs) {
			best = list[i];
			bestMs = ms;
		}
	}
	return best;
}

function mgDl(c: Creatinine | undefined, index: number): number {
	if (c != null) {
		const v = c.value;
		if (typeof v === 'number' && v > 0 && v < Infinity) {
			if (c.unit === 'mg/dL') return v;
			if (c.unit === 'umol/L') return v / CREATININE_UMOL_L_PER_MG_DL;
			throw new ClinicalInputError(`creatinine[${index}].creatinine.unit`, c.unit, "must be 'mg/dL' or 'umol/L'");
		}
		throw new ClinicalInputError(`creatinine[${index}].creatinine.value`, v, 'must be a finite number > 0');
	}
	throw new ClinicalInputError(`creatinine[${index}].creatinine`, c, 'must be { value, unit }');
}

type DrugModelResult = {
	snapshot: KineticsSnapshot;
	/** Giusti–Hayton Q (generic model) or null */
	q: number | null;
	clearanceBeforeAlbuminLPerH: number;
	volumeBeforeAlbuminL: number;
	renalClearanceLPerH: number;
	albumin: ReturnType<typeof albuminAdjustedKineticsRaw> | null;
};

/** Drug CL and Vd from CrCl, the Vd weight and (for highly bound agents) the unbound fraction. */
function drugModel(
	agent: AgentParams,
	crclMlMin: number,
	vdWeightKg: number,
	crclNormalMlMin: number,
	arc: boolean,
	fuRef: number,
	fuNew: number | null
): DrugModelResult {
	const volumeL = agent.vdLPerKg * vdWeightKg;
	let clearanceLPerH: number;
	let renalClearanceLPerH: number;
	let q: number | null = null;
	if (agent.model === 'vancomycin') {
		clearanceLPerH = vancomycinClearanceLPerH(crclMlMin);
		renalClearanceLPerH = agent.fe * clearanceLPerH;
	} else if (agent.model === 'aminoglycoside') {
		clearanceLPerH = (AMINOGLYCOSIDE_K_SLOPE * crclMlMin + AMINOGLYCOSIDE_K_INTERCEPT) * volumeL;
		renalClearanceLPerH = agent.fe * clearanceLPerH;
	} else {
		const clearanceNormalLPerH = (Math.LN2 * volumeL) / agent.halfLifeNormalH;
		// ARC is modelled deliberately: above the normal CrCl the renal part keeps rising (ratio not capped).
		q = renalAdjustmentFactorRaw(agent.fe, crclMlMin, crclNormalMlMin, arc);
		clearanceLPerH = clearanceNormalLPerH * q;
		renalClearanceLPerH = clearanceLPerH - clearanceNormalLPerH * (1 - agent.fe);
	}
	let albumin: DrugModelResult['albumin'] = null;
	let cl = clearanceLPerH;
	let v = volumeL;
	if (fuNew !== null && agent.proteinBinding >= HIGHLY_BOUND_THRESHOLD) {
		albumin = albuminAdjustedKineticsRaw(clearanceLPerH, renalClearanceLPerH, volumeL, vdWeightKg, crclMlMin, fuRef, fuNew);
		cl = albumin.clearanceLPerH;
		v = albumin.volumeL;
	}
	const kPerH = cl / v;
	return {
		snapshot: { clearanceLPerH: cl, volumeL: v, kPerH, halfLifeH: Math.LN2 / kPerH },
		q,
		clearanceBeforeAlbuminLPerH: clearanceLPerH,
		volumeBeforeAlbuminL: volumeL,
		renalClearanceLPerH,
		albumin
	};
}

function weightForBasis(
	basis: WeightBasis | 'dosing',
	actualKg: number | null,
	idealKg: number | null,
	adjustedKg: number | null,
	dosingKg: number | null
): number | null {
	if (actualKg === null) return null;
	switch (basis) {
		case 'actual':
			return actualKg;
		case 'ideal':
			return idealKg ?? actualKg;
		case 'adjusted':
			return adjustedKg ?? actualKg;
		default:
			return dosingKg ?? actualKg;
	}
}

const BASIS_LABEL: Record<WeightBasis | 'dosing', string> = {
	actual: 'actual body weight',
	ideal: 'ideal body weight',
	adjusted: 'adjusted body weight',
	dosing: 'dosing weight'
};

const MODEL_FORMULA = {
	vancomycin: 'F15 Matzke: CL (mL/min) = 3.66 + 0.689 × CrCl; × 0.06 → L/h',
	aminoglycoside: 'F14: k = 0.00293 × CrCl + 0.014 h⁻¹; CL = k × Vd',
	generic: 'F13: CL = Q × CL_normal, CL_normal = ln2 × Vd / t½_normal, Q = 1 − fe × (1 − CrCl / CrCl_normal)'
} as const;

const EMPTY_SETTINGS: AssessSettings = {};

export function assess(inputArg: AssessInput): Assessment {
	const atMs = requireDate('at', inputArg.at);
	const at = inputArg.at;
	const agent = inputArg.agent;
	validateAgent(agent);
	const order = inputArg.order;
	if (order == null || typeof order !== 'object') throw new ClinicalInputError('order', order, 'must be an object');
	const orderDoseMg = requirePositive('order.doseMg', order.doseMg);
	const orderIntervalH = requirePositive('order.intervalH', order.intervalH);
	const orderInfusionH = requireNonNegative('order.infusionH', order.infusionH);
	if (orderInfusionH > orderIntervalH) throw new ClinicalInputError('order.infusionH', orderInfusionH, 'must not exceed order.intervalH');
	if (order.route !== 'iv' && order.route !== 'po' && order.route !== 'im') {
		throw new ClinicalInputError('order.route', order.route, "must be 'iv', 'po' or 'im'");
	}
	const startMs = requireDate('order.startAt', order.startAt);
	const patient = inputArg.patient;
	if (patient == null || typeof patient !== 'object') throw new ClinicalInputError('patient', patient, 'must be an object');
	const sex = requireSex('patient.sex', patient.sex);
	const female = sex === 'female';
	const settings = inputArg.settings ?? EMPTY_SETTINGS;
	const obeseRatio = settings.obeseRatio === undefined ? DEFAULT_OBESE_RATIO : requirePositive('settings.obeseRatio', settings.obeseRatio);
	if (obeseRatio < 1) throw new ClinicalInputError('settings.obeseRatio', obeseRatio, 'must be ≥ 1');
	const crclNormalMlMin =
		settings.crclNormalMlMin === undefined ? DEFAULT_CRCL_NORMAL_ML_MIN : requirePositive('settings.crclNormalMlMin', settings.crclNormalMlMin);
	const bsaFormula = settings.bsaFormula ?? 'mosteller';
	if (bsaFormula !== 'mosteller' && bsaFormula !== 'dubois') {
		throw new ClinicalInputError('settings.bsaFormula', bsaFormula, "must be 'mosteller' or 'dubois'");
	}
	const scrFloorMgDl =
		settings.scrFloorMgDl === undefined || settings.scrFloorMgDl === null ? null : requirePositive('settings.scrFloorMgDl', settings.scrFloorMgDl);
	const maxAlbuminAgeH =
		settings.maxAlbuminAgeH === undefined ? DEFAULT_MAX_ALBUMIN_AGE_H : requirePositive('settings.maxAlbuminAgeH', settings.maxAlbuminAgeH);
	const bandTolerance =
		settings.bandTolerance === undefined ? DEFAULT_BAND_TOLERANCE : requireNonNegative('settings.bandTolerance', settings.bandTolerance);
	const maxRiseSetting =
		settings.kineticGfrMaxRiseMgDlPerDay === undefined || settings.kineticGfrMaxRiseMgDlPerDay === null
			? null
			: requirePositive('settings.kineticGfrMaxRiseMgDlPerDay', settings.kineticGfrMaxRiseMgDlPerDay);

	const trace: TraceStep[] = [];
	const missing: string[] = [];

	// ── Age ────────────────────────────────────────────────────────────────────────────────────────
	let ageYears: number;
	// a database row may carry null for an unknown birth date: treat it as absent
	const birthMs = patient.birthDate == null ? null : requireDate('patient.birthDate', patient.birthDate);
	if (birthMs !== null) {
		// completed years (UTC calendar), the age the creatinine equations expect
		ageYears = requireAdultAge('patient.birthDate', completedYearsRaw(birthMs, atMs));
		trace.push(
			step(
				'age',
				'Age',
				ageYears,
				'a',
				'completed years from birth date to assessment time',
				[input('birth date', ymdString(utcYmd(birthMs)), '', SOURCES.record)],
				SOURCES.commonPractice
			)
		);
	} else {
		ageYears = requireAdultAge('patient.ageYears', patient.ageYears);
		trace.push(step('age', 'Age', ageYears, 'a', 'age as recorded', [input('ageYears', ageYears, 'a', SOURCES.record)], SOURCES.record));
	}

	// ── Body size ──────────────────────────────────────────────────────────────────────────────────
	const heightRow = latestAtOrBefore(patient.heights ?? [], atMs, 'patient.heights');
	const weightRow = latestAtOrBefore(patient.weights ?? [], atMs, 'patient.weights');
	const heightCm = heightRow === null ? null : requirePositive('patient.heights.cm', heightRow.cm);
	const weightKg = weightRow === null ? null : requirePositive('patient.weights.kg', weightRow.kg);
	if (heightCm === null) missing.push('height');
	if (weightKg === null) missing.push('weight');
	trace.push(
		step('height', 'Height', heightCm, 'cm', 'latest height at or before assessment time', [], SOURCES.record, heightCm === null ? 'no height recorded' : undefined),
		step('weight', 'Weight (actual)', weightKg, 'kg', 'latest weight at or before assessment time', [], SOURCES.record, weightKg === null ? 'no weight recorded' : undefined)
	);

	let idealKg: number | null = null;
	let adjustedKg: number | null = null;
	let dosingKg: number | null = null;
	let weightBasis: WeightBasis | null = null;
	let bsaM2: number | null = null;
	if (heightCm !== null) {
		idealKg = (female ? 45.5 : 50) + 2.3 * (heightCm / CM_PER_INCH - 60);
		if (idealKg <= 0) throw new ClinicalInputError('patient.heights.cm', heightCm, 'is too short for the Devine ideal-weight formula');
		trace.push(
			step(
				'ibw',
				'Ideal body weight (Devine)',
				idealKg,
				'kg',
				'F2: IBW = 50 (M) | 45.5 (F) + 2.3 × (height_cm / 2.54 − 60)',
				[input('height', heightCm, 'cm', 'step height'), input('sex', sex, '', SOURCES.record)],
				SOURCES.devine,
				devineInRange(heightCm) ? undefined : 'height below 152.4 cm (60 in): Devine line extrapolated — low confidence'
			)
		);
	} else {
		trace.push(step('ibw', 'Ideal body weight (Devine)', null, 'kg', 'F2', [], SOURCES.devine, 'not computed: no height'));
	}
	if (weightKg !== null && idealKg !== null) {
		adjustedKg = idealKg + ADJUSTED_WEIGHT_FACTOR * (weightKg - idealKg);
		const chosen = chooseDosingWeight(weightKg, idealKg, obeseRatio);
		dosingKg = chosen.weightKg;
		weightBasis = chosen.basis;
		bsaM2 = bsaFormula === 'dubois' ? 0.007184 * Math.pow(weightKg, 0.425) * Math.pow(heightCm as number, 0.725) : Math.sqrt(((heightCm as number) * weightKg) / 3600);
		trace.push(
			step(
				'adjbw',
				'Adjusted body weight',
				adjustedKg,
				'kg',
				'F3: AdjBW = IBW + 0.4 × (TBW − IBW)',
				[input('IBW', idealKg, 'kg', 'step ibw'), input('TBW', weightKg, 'kg', 'step weight')],
				SOURCES.adjustedWeight
			),
			step(
				'dosingWeight',
				'Dosing weight',
				dosingKg,
				'kg',
				'actual if TBW < IBW; IBW if TBW ≤ obese ratio × IBW; AdjBW above',
				[
					input('TBW', weightKg, 'kg', 'step weight'),
					input('IBW', idealKg, 'kg', 'step ibw'),
					input('obese ratio', obeseRatio, '', settings.obeseRatio === undefined ? 'default' : 'settings'),
					input('basis', weightBasis, '', 'chosen')
				],
				SOURCES.weightChoice
			),
			step(
				'bsa',
				bsaFormula === 'dubois' ? 'Body surface area (Du Bois)' : 'Body surface area (Mosteller)',
				bsaM2,
				'm2',
				bsaFormula === 'dubois' ? 'F7: BSA = 0.007184 × W^0.425 × H^0.725' : 'F7: BSA = sqrt(H_cm × W_kg / 3600)',
				[input('height', heightCm, 'cm', 'step height'), input('weight', weightKg, 'kg', 'step weight')],
				bsaFormula === 'dubois' ? SOURCES.duBois : SOURCES.mosteller
			)
		);
	} else if (weightKg !== null) {
		// No height: no IBW, so the actual weight stands in — said here and listed under missing.
		dosingKg = weightKg;
		weightBasis = 'actual';
		trace.push(
			step('adjbw', 'Adjusted body weight', null, 'kg', 'F3', [], SOURCES.adjustedWeight, 'not computed: no height'),
			step(
				'dosingWeight',
				'Dosing weight',
				dosingKg,
				'kg',
				'actual weight used because no height is recorded (IBW unknown)',
				[input('TBW', weightKg, 'kg', 'step weight')],
				SOURCES.weightChoice,
				'no height: actual weight used; obese patients will be over-estimated'
			),
			step('bsa', 'Body surface area', null, 'm2', 'F7', [], SOURCES.mosteller, 'not computed: no height')
		);
	} else {
		trace.push(
			step('adjbw', 'Adjusted body weight', null, 'kg', 'F3', [], SOURCES.adjustedWeight, 'not computed: no weight'),
			step('dosingWeight', 'Dosing weight', null, 'kg', 'F4 weight choice', [], SOURCES.weightChoice, 'not computed: no weight'),
			step('bsa', 'Body surface area', null, 'm2', 'F7', [], SOURCES.mosteller, 'not computed: no weight')
		);
	}

	// ── Creatinine history ─────────────────────────────────────────────────────────────────────────
	const creatinineList = inputArg.creatinine ?? [];
	const times: number[] = [];
	const values: number[] = [];
	let sorted = true;
	let latestAt: Date | null = null;
	let latestAtMsSeen = -Infinity;
	for (let i = 0; i < creatinineList.length; i++) {
		const row = creatinineList[i];
		const t = row.at instanceof Date ? row.at.getTime() : NaN;
		if (Number.isNaN(t)) throw new ClinicalInputError(`creatinine[${i}].at`, row.at, 'must be a valid Date');
		const v = mgDl(row.creatinine, i);
		if (t > atMs) continue;
		if (t >= latestAtMsSeen) {
			latestAtMsSeen = t;
			latestAt = row.at;
		}
		if (times.length > 0 && t < times[times.length - 1]) sorted = false;
		times.push(t);
		values.push(v);
	}
	if (!sorted) {
		const order = times.map((_, i) => i).sort((a, b) => times[a] - times[b]);
		const t2 = order.map((i) => times[i]);
		const v2 = order.map((i) => values[i]);
		for (let i = 0; i < t2.length; i++) {
			times[i] = t2[i];
			values[i] = v2[i];
		}
	}
	const n = times.length;
	const latestMgDl = n > 0 ? values[n - 1] : null;
	const latestAtMs = n > 0 ? times[n - 1] : null;
	const creatinineAgeH = latestAtMs === null ? null : (atMs - latestAtMs) / HOUR_MS;
	const creatinineFresh = creatinineAgeH !== null && creatinineAgeH <= agent.maxCreatinineAgeH;
	if (latestMgDl === null) missing.push('creatinine');
	else if (!creatinineFresh) missing.push(`creatinine older than ${agent.maxCreatinineAgeH} h`);
	trace.push(
		step(
			'creatinine',
			'Serum creatinine (latest)',
			latestMgDl,
			'mg/dL',
			'F1: µmol/L ÷ 88.4 = mg/dL',
			[input('age of result', creatinineAgeH, 'h', 'result time'), input('max age', agent.maxCreatinineAgeH, 'h', SOURCES.agentLibrary)],
			SOURCES.creatinineUnits,
			latestMgDl === null ? 'no creatinine result' : creatinineFresh ? undefined : 'result older than the agent’s limit: renal estimates not computed'
		)
	);

	const scan = n > 0 ? scanCreatinine(times, values, n, atMs) : null;
	const kdigoStage = scan === null ? 0 : scan.stage;
	const rise48 = scan === null ? null : scan.riseWithin48hMgDl;
	const fall48 = scan === null ? 0 : scan.fallWithin48hMgDl;
	const stable = scan !== null && kdigoStage === 0 && (rise48 as number) < AKI_RISE_MG_DL - EPS && fall48 < AKI_RISE_MG_DL - EPS;
	trace.push(
		step(
			'kdigo',
			'KDIGO AKI stage (creatinine)',
			kdigoStage,
			'{stage}',
			'F8: rise ≥ 0.3 mg/dL within 48 h or ≥ 1.5 × baseline → 1; 2.0–2.9 × → 2; ≥ 3 × or ≥ 4.0 mg/dL → 3',
			[
				input('baseline (lowest in 7 days)', scan === null ? null : scan.baselineMgDl, 'mg/dL', 'creatinine history'),
				input('current', latestMgDl, 'mg/dL', 'step creatinine'),
				input('largest rise within 48 h', rise48, 'mg/dL', 'creatinine history')
			],
			SOURCES.kdigo,
			scan === null ? 'no creatinine in the last 7 days' : undefined
		),
		step(
			'creatinineStable',
			'Creatinine stable',
			stable,
			'',
			'stable when KDIGO stage 0 and no rise or fall ≥ 0.3 mg/dL within 48 h',
			[input('largest fall within 48 h', scan === null ? null : fall48, 'mg/dL', 'creatinine history')],
			SOURCES.commonPractice,
			stable ? undefined : 'Cockcroft–Gault assumes steady-state creatinine: treat CrCl as unreliable'
		)
	);

	// ── Renal function ─────────────────────────────────────────────────────────────────────────────
	let scrForCg: number | null = null;
	if (creatinineFresh) {
		scrForCg = latestMgDl as number;
		if (scrFloorMgDl !== null && scrForCg < scrFloorMgDl) {
			scrForCg = scrFloorMgDl;
			trace.push(
				step(
					'scrFloor',
					'Creatinine for Cockcroft–Gault (floored)',
					scrForCg,
					'mg/dL',
					'max(SCr, floor)',
					[input('SCr', latestMgDl, 'mg/dL', 'step creatinine'), input('floor', scrFloorMgDl, 'mg/dL', 'settings')],
					SOURCES.scrFloor
				)
			);
		}
	}
	const crclMlMin = scrForCg !== null && dosingKg !== null ? cockcroftGaultRaw(ageYears, female, dosingKg, scrForCg) : null;
	trace.push(
		step(
			'crcl',
			'Creatinine clearance (Cockcroft–Gault)',
			crclMlMin,
			'mL/min',
			'F4: (140 − age) × weight / (72 × SCr), × 0.85 if female',
			[
				input('age', ageYears, 'a', 'step age'),
				input('weight', dosingKg, 'kg', 'step dosingWeight'),
				input('SCr', scrForCg, 'mg/dL', scrFloorMgDl !== null && scrForCg === scrFloorMgDl ? 'step scrFloor' : 'step creatinine'),
				input('sex', sex, '', SOURCES.record)
			],
			SOURCES.cockcroftGault,
			crclMlMin === null ? (dosingKg === null ? 'not computed: no weight' : 'not computed: no current creatinine') : stable ? undefined : 'creatinine not at steady state'
		)
	);
	const egfrIndexed = creatinineFresh ? ckdEpi2021Raw(ageYears, female, latestMgDl as number) : null;
	const egfrMlMin = egfrIndexed !== null && bsaM2 !== null ? (egfrIndexed * bsaM2) / 1.73 : null;
	trace.push(
		step(
			'egfr',
			'eGFR (CKD-EPI 2021, creatinine)',
			egfrIndexed,
			'mL/min/{1.73_m2}',
			'F5: 142 × min(SCr/κ,1)^α × max(SCr/κ,1)^−1.200 × 0.9938^age × 1.012 [F]',
			[input('age', ageYears, 'a', 'step age'), input('SCr', creatinineFresh ? latestMgDl : null, 'mg/dL', 'step creatinine'), input('sex', sex, '', SOURCES.record)],
			SOURCES.ckdEpi2021,
			egfrIndexed === null ? 'not computed: no current creatinine' : undefined
		),
		step(
			'egfrMlMin',
			'eGFR de-indexed',
			egfrMlMin,
			'mL/min',
			'F7: eGFR × BSA / 1.73',
			[input('eGFR', egfrIndexed, 'mL/min/{1.73_m2}', 'step egfr'), input('BSA', bsaM2, 'm2', 'step bsa')],
			SOURCES.deindex,
			egfrMlMin === null ? 'not computed: needs eGFR and BSA' : undefined
		)
	);

	let kineticGfrMlMin: number | null = null;
	if (!stable && creatinineFresh && dosingKg !== null && weightKg !== null && scan !== null && n >= 2) {
		// the two most recent results at least 6 h apart, both inside the 7-day window
		const secondT = times[n - 1];
		let prev = -1;
		for (let i = n - 2; i >= 0; i--) {
			if (secondT - times[i] >= KINETIC_GFR_MIN_INTERVAL_H * HOUR_MS) {
				prev = i;
				break;
			}
		}
		if (prev >= 0 && atMs - times[prev] <= 7 * 24 * HOUR_MS) {
			const baseline = scan.baselineMgDl;
			const baselineForCg = scrFloorMgDl !== null && baseline < scrFloorMgDl ? scrFloorMgDl : baseline;
			const crclSs = cockcroftGaultRaw(ageYears, female, dosingKg, baselineForCg);
			const maxRise = maxRiseSetting ?? creatinineMaxRisePerDayRaw(baseline, crclSs, weightKg, CREATININE_WATER_L_PER_KG);
			const intervalH = (secondT - times[prev]) / HOUR_MS;
			kineticGfrMlMin = kineticGfrRaw(baseline, crclSs, values[prev], values[n - 1], intervalH, maxRise);
			trace.push(
				step(
					'kineticGfr',
					'Kinetic GFR',
					kineticGfrMlMin,
					'mL/min',
					'KeGFR = (SSPCr × CrCl_ss / MeanPCr) × (1 − 24 × ΔPCr / (Δt × MaxΔPCr/day)); below 0 reported as 0',
					[
						input('SSPCr (baseline)', baseline, 'mg/dL', 'step kdigo'),
						input('CrCl_ss (Cockcroft–Gault at baseline)', crclSs, 'mL/min', 'Cockcroft–Gault'),
						input('first creatinine', values[prev], 'mg/dL', 'creatinine history'),
						input('second creatinine', values[n - 1], 'mg/dL', 'step creatinine'),
						input('Δt', intervalH, 'h', 'result times'),
						input(
							'MaxΔPCr/day',
							maxRise,
							'mg/dL/d',
							maxRiseSetting === null ? 'production SSPCr × CrCl_ss over 0.6 L/kg body water (from memory)' : 'settings'
						)
					],
					SOURCES.kineticGfr
				)
			);
		}
	}

	const arc = crclMlMin !== null && crclMlMin >= ARC_THRESHOLD_ML_MIN;
	trace.push(
		step(
			'arc',
			'Possible augmented renal clearance',
			arc,
			'',
			'F9: CrCl ≥ 130 mL/min',
			[input('CrCl', crclMlMin, 'mL/min', 'step crcl')],
			SOURCES.arc,
			'estimated CrCl is only a surrogate for measured urinary CrCl'
		)
	);

	// ── Albumin ────────────────────────────────────────────────────────────────────────────────────
	const albuminList = inputArg.albumin ?? [];
	const albuminRow = latestAtOrBefore(albuminList, atMs, 'albumin');
	const albuminGL = albuminRow === null ? null : requirePositive('albumin.gL', albuminRow.gL);
	const albuminAgeH = albuminRow === null ? null : (atMs - albuminRow.at.getTime()) / HOUR_MS;
	const albuminFresh = albuminAgeH !== null && albuminAgeH <= maxAlbuminAgeH;
	if (albuminRow === null) missing.push('albumin');
	else if (!albuminFresh) missing.push(`albumin older than ${maxAlbuminAgeH} h`);
	const fuRef = 1 - agent.proteinBinding;
	const albuminRefGL = agent.albuminRefGL ?? DEFAULT_ALBUMIN_REF_G_L;
	const fuNow = albuminFresh ? unboundFractionRaw(fuRef, albuminRefGL, albuminGL as number) : null;
	const highlyBound = agent.proteinBinding >= HIGHLY_BOUND_THRESHOLD;
	trace.push(
		step(
			'unboundFraction',
			'Unbound fraction at current albumin',
			fuNow,
			'1',
			'F16: fu = 1 / (1 + ((1 − fu_ref)/fu_ref) × Alb / Alb_ref)',
			[
				input('fu_ref (1 − protein binding)', fuRef, '1', SOURCES.agentLibrary),
				input('Alb_ref', albuminRefGL, 'g/L', SOURCES.agentLibrary),
				input('albumin', albuminGL, 'g/L', 'latest albumin result'),
				input('age of result', albuminAgeH, 'h', 'result time')
			],
			SOURCES.unboundFraction,
			albuminRow === null ? 'no albumin result' : albuminFresh ? undefined : 'albumin result too old'
		)
	);

	// ── Drug kinetics now ──────────────────────────────────────────────────────────────────────────
	const vdWeightKg = weightForBasis(agent.vdWeightBasis, weightKg, idealKg, adjustedKg, dosingKg);
	let now: KineticsSnapshot | null = null;
	let nowModel: DrugModelResult | null = null;
	const albuminBlocks = highlyBound && !albuminFresh;
	if (crclMlMin !== null && vdWeightKg !== null && !albuminBlocks) {
		nowModel = drugModel(agent, crclMlMin, vdWeightKg, crclNormalMlMin, arc, fuRef, fuNow);
		now = nowModel.snapshot;
	}
	const kineticsNote =
		crclMlMin === null ? 'not computed: no CrCl' : vdWeightKg === null ? 'not computed: no weight' : albuminBlocks ? 'not computed: highly bound agent without a current albumin' : undefined;
	const vdWeightSource =
		vdWeightKg !== null && heightCm === null && agent.vdWeightBasis !== 'actual'
			? 'actual weight (no height: ' + BASIS_LABEL[agent.vdWeightBasis] + ' unknown)'
			: BASIS_LABEL[agent.vdWeightBasis];
	if (agent.model === 'generic') {
		trace.push(
			step(
				'renalFactor',
				'Renal dose-adjustment factor Q',
				nowModel === null ? null : nowModel.q,
				'1',
				'F13: Q = 1 − fe × (1 − CrCl / CrCl_normal); ratio capped at 1 unless possible ARC',
				[
					input('fe', agent.fe, '1', SOURCES.agentLibrary),
					input('CrCl', crclMlMin, 'mL/min', 'step crcl'),
					input('CrCl_normal', crclNormalMlMin, 'mL/min', settings.crclNormalMlMin === undefined ? 'default' : 'settings')
				],
				SOURCES.giustiHayton,
				nowModel === null ? kineticsNote : arc ? 'possible ARC: ratio not capped, renal clearance above normal' : undefined
			)
		);
	}
	trace.push(
		step(
			'volume',
			'Volume of distribution (reference albumin)',
			nowModel === null ? null : nowModel.volumeBeforeAlbuminL,
			'L',
			'Vd = Vd per kg × weight',
			[input('Vd per kg', agent.vdLPerKg, 'L/kg', SOURCES.agentLibrary), input('weight', vdWeightKg, 'kg', vdWeightSource)],
			agent.model === 'vancomycin' ? SOURCES.matzke : agent.model === 'aminoglycoside' ? SOURCES.aminoglycoside : SOURCES.agentLibrary,
			nowModel === null ? kineticsNote : undefined
		),
		step(
			'clearance',
			'Drug clearance (reference albumin)',
			nowModel === null ? null : nowModel.clearanceBeforeAlbuminLPerH,
			'L/h',
			MODEL_FORMULA[agent.model],
			agent.model === 'generic'
				? [
						input('Vd', nowModel === null ? null : nowModel.volumeBeforeAlbuminL, 'L', 'step volume'),
						input('t½_normal', agent.halfLifeNormalH, 'h', SOURCES.agentLibrary),
						input('Q', nowModel === null ? null : nowModel.q, '1', 'step renalFactor')
					]
				: [input('CrCl', crclMlMin, 'mL/min', 'step crcl'), input('Vd', nowModel === null ? null : nowModel.volumeBeforeAlbuminL, 'L', 'step volume')],
			agent.model === 'vancomycin' ? SOURCES.matzke : agent.model === 'aminoglycoside' ? SOURCES.aminoglycoside : SOURCES.giustiHayton,
			nowModel === null ? kineticsNote : undefined
		)
	);
	if (highlyBound) {
		const alb = nowModel === null ? null : nowModel.albumin;
		trace.push(
			step(
				'albuminAdjustment',
				'Highly bound agent: CL and Vd at current albumin',
				alb === null ? null : alb.fuRatioApplied,
				'1',
				'fu ratio r = fu/fu_ref (applied only below Alb_ref, capped at 2); CL = CL_secreted + (CL_filtered + CL_nonrenal) × r with CL_filtered ≤ fu_ref × CrCl; Vd = Vp(1+R) + fu·(Ve − R·Vp) + Vt·r (Øie–Tozer; Vp 3 L, Ve 12 L per 70 kg, R 1.4)',
				[
					input('fu', fuNow, '1', 'step unboundFraction'),
					input('fu_ref', fuRef, '1', SOURCES.agentLibrary),
					input('fu ratio before cap', alb === null ? null : alb.fuRatio, '1', 'computed'),
					input('CL filtered', alb === null ? null : alb.filteredLPerH, 'L/h', 'computed'),
					input('CL secreted', alb === null ? null : alb.secretedLPerH, 'L/h', 'computed'),
					input('CL non-renal', alb === null ? null : alb.nonRenalLPerH, 'L/h', 'computed'),
					input('volume model', alb === null ? null : alb.volumeModel, '', 'computed'),
					input('cap', MAX_FU_RATIO, '1', SOURCES.commonPractice)
				],
				SOURCES.albuminModel,
				alb === null
					? kineticsNote ?? 'not applied'
					: 'total levels fall while unbound exposure is in theory unchanged; consider unbound-level TDM or extended infusion where available — no automatic dose increase'
			)
		);
	}
	trace.push(
		step(
			'kNow',
			'Elimination rate constant',
			now === null ? null : now.kPerH,
			'/h',
			'F10: k = CL / Vd',
			[input('CL', now === null ? null : now.clearanceLPerH, 'L/h', highlyBound ? 'step albuminAdjustment' : 'step clearance'), input('Vd', now === null ? null : now.volumeL, 'L', highlyBound ? 'step albuminAdjustment' : 'step volume')],
			SOURCES.oneCompartment,
			now === null ? kineticsNote : undefined
		),
		step(
			'halfLifeNow',
			'Expected half-life',
			now === null ? null : now.halfLifeH,
			'h',
			'F10: t½ = ln2 / k',
			[input('k', now === null ? null : now.kPerH, '/h', 'step kNow')],
			SOURCES.oneCompartment,
			now === null ? kineticsNote : undefined
		)
	);

	// ── Drug kinetics at the order's start ─────────────────────────────────────────────────────────
	const startRefMs = startMs < atMs ? startMs : atMs;
	let crclAtStartMlMin: number | null = null;
	let atStart: KineticsSnapshot | null = null;
	let startNote: string | undefined;
	let startCreatinineMgDl: number | null = null;
	{
		// creatinine in effect at the start: latest at or before it, else the first within 24 h after it
		let idx = -1;
		for (let i = n - 1; i >= 0; i--) {
			if (times[i] <= startRefMs) {
				idx = i;
				break;
			}
		}
		if (idx >= 0 && (startRefMs - times[idx]) / HOUR_MS > agent.maxCreatinineAgeH) idx = -1;
		if (idx < 0) {
			for (let i = 0; i < n; i++) {
				if (times[i] > startRefMs) {
					if (times[i] - startRefMs <= START_GRACE_H * HOUR_MS) idx = i;
					break;
				}
			}
		}
		if (idx < 0) {
			// with no creatinine at all, "creatinine" is already listed
			if (n > 0) missing.push('creatinine at order start');
			startNote = 'no creatinine in effect at the order start';
		} else {
			startCreatinineMgDl = values[idx];
			const startWeightRow =
				latestAtOrBefore(patient.weights ?? [], startRefMs, 'patient.weights') ?? weightRow;
			const startHeightRow = latestAtOrBefore(patient.heights ?? [], startRefMs, 'patient.heights') ?? heightRow;
			const startAge = birthMs !== null ? completedYearsRaw(birthMs, startRefMs) : ageYears;
			if (startWeightRow === null || startAge < 18) {
				startNote = startWeightRow === null ? 'no weight at the order start' : 'patient under 18 at the order start';
			} else {
				const w = requirePositive('patient.weights.kg', startWeightRow.kg);
				const h = startHeightRow === null ? null : requirePositive('patient.heights.cm', startHeightRow.cm);
				let ibw: number | null = null;
				let adj: number | null = null;
				let dosing = w;
				if (h !== null) {
					ibw = (female ? 45.5 : 50) + 2.3 * (h / CM_PER_INCH - 60);
					if (ibw > 0) {
						adj = ibw + ADJUSTED_WEIGHT_FACTOR * (w - ibw);
						dosing = chooseDosingWeight(w, ibw, obeseRatio).weightKg;
					} else ibw = null;
				}
				const scrStart = scrFloorMgDl !== null && startCreatinineMgDl < scrFloorMgDl ? scrFloorMgDl : startCreatinineMgDl;
				crclAtStartMlMin = cockcroftGaultRaw(startAge, female, dosing, scrStart);
				let fuStart: number | null = null;
				let albuminOk = true;
				if (highlyBound) {
					const albStart =
						latestAtOrBefore(albuminList, startRefMs, 'albumin') ?? earliestWithin(albuminList, startRefMs, Math.min(atMs, startRefMs + START_GRACE_H * HOUR_MS));
					if (albStart === null || (startRefMs - albStart.at.getTime()) / HOUR_MS > maxAlbuminAgeH) {
						albuminOk = false;
						if (albuminRow !== null) missing.push('albumin at order start');
						startNote = 'highly bound agent without an albumin at the order start';
					} else {
						fuStart = unboundFractionRaw(fuRef, albuminRefGL, requirePositive('albumin.gL', albStart.gL));
					}
				}
				if (albuminOk) {
					const vdW = weightForBasis(agent.vdWeightBasis, w, ibw, adj, dosing) as number;
					const arcStart = crclAtStartMlMin >= ARC_THRESHOLD_ML_MIN;
					atStart = drugModel(agent, crclAtStartMlMin, vdW, crclNormalMlMin, arcStart, fuRef, fuStart).snapshot;
				}
			}
		}
	}
	const halfLifeRatio = now !== null && atStart !== null ? now.halfLifeH / atStart.halfLifeH : null;
	trace.push(
		step(
			'crclAtStart',
			'CrCl at the order start (Cockcroft–Gault)',
			crclAtStartMlMin,
			'mL/min',
			'F4 with the creatinine, weight and age in effect at the order start',
			[input('SCr at start', startCreatinineMgDl, 'mg/dL', 'latest at or before the start, else first within 24 h after')],
			SOURCES.cockcroftGault,
			startNote
		),
		step(
			'halfLifeAtStart',
			'Half-life at the order start',
			atStart === null ? null : atStart.halfLifeH,
			'h',
			'same drug model as now, with the values in effect at the order start',
			[
				input('CL at start', atStart === null ? null : atStart.clearanceLPerH, 'L/h', 'drug model'),
				input('Vd at start', atStart === null ? null : atStart.volumeL, 'L', 'drug model')
			],
			SOURCES.oneCompartment,
			startNote
		),
		step(
			'halfLifeRatio',
			'Half-life now / at start',
			halfLifeRatio,
			'1',
			't½_now / t½_start',
			[input('t½ now', now === null ? null : now.halfLifeH, 'h', 'step halfLifeNow'), input('t½ at start', atStart === null ? null : atStart.halfLifeH, 'h', 'step halfLifeAtStart')],
			SOURCES.commonPractice
		)
	);

	// ── Exposure of the current regimen ────────────────────────────────────────────────────────────
	const dailyDoseMg = (orderDoseMg * 24) / orderIntervalH;
	const iv = order.route === 'iv';
	const f = iv ? 1 : agent.bioavailability;
	let peakMgL: number | null = null;
	let troughMgL: number | null = null;
	let auc24MgHL: number | null = null;
	let exposureNote: string | undefined = kineticsNote;
	if (now !== null) {
		if (iv) {
			const ss = steadyStateInfusionRaw(orderDoseMg, orderInfusionH, orderIntervalH, now.volumeL, now.kPerH);
			peakMgL = ss.peakMgL;
			troughMgL = ss.troughMgL;
		} else {
			exposureNote = 'oral/IM route: absorption not modelled, so no peak or trough';
		}
		if (f > 0) auc24MgHL = (f * dailyDoseMg) / now.clearanceLPerH;
		else exposureNote = 'not absorbed systemically by this route (bioavailability 0)';
	}
	trace.push(
		step(
			'peak',
			'Predicted steady-state peak (end of infusion)',
			peakMgL,
			'mg/L',
			'F12: Cmax,ss = k0 (1 − e^(−k·tinf)) / (k·Vd·(1 − e^(−kτ))), k0 = dose / tinf',
			[
				input('dose', orderDoseMg, 'mg', 'order'),
				input('tinf', orderInfusionH, 'h', 'order'),
				input('τ', orderIntervalH, 'h', 'order'),
				input('Vd', now === null ? null : now.volumeL, 'L', 'drug model'),
				input('k', now === null ? null : now.kPerH, '/h', 'step kNow')
			],
			SOURCES.sawchukZaske,
			exposureNote
		),
		step(
			'trough',
			'Predicted steady-state trough',
			troughMgL,
			'mg/L',
			'F12: Cmin,ss = Cmax,ss × e^(−k(τ − tinf))',
			[input('Cmax,ss', peakMgL, 'mg/L', 'step peak'), input('trough limit', agent.troughMaxMgL, 'mg/L', SOURCES.agentLibrary)],
			SOURCES.sawchukZaske,
			exposureNote
		),
		step(
			'auc24',
			'Predicted steady-state AUC over 24 h',
			auc24MgHL,
			'mg.h/L',
			'F10: AUC24 = F × daily dose / CL',
			[
				input('daily dose', dailyDoseMg, 'mg', 'order'),
				input('F', f, '1', iv ? 'IV' : SOURCES.agentLibrary),
				input('CL', now === null ? null : now.clearanceLPerH, 'L/h', 'drug model'),
				input('AUC target low', agent.aucTargetMgHL === null ? null : agent.aucTargetMgHL[0], 'mg.h/L', SOURCES.agentLibrary),
				input('AUC target high', agent.aucTargetMgHL === null ? null : agent.aucTargetMgHL[1], 'mg.h/L', SOURCES.agentLibrary)
			],
			agent.aucTargetMgHL === null ? SOURCES.oneCompartment : SOURCES.aucTarget,
			auc24MgHL === null ? exposureNote : undefined
		)
	);

	// ── Renal band and proposal ────────────────────────────────────────────────────────────────────
	const bandWeightKg = vdWeightKg;
	const band: DoseBand | null = crclMlMin === null ? null : findBand(agent.renalBands, crclMlMin);
	let bandDailyDoseMg: number | null = null;
	if (band !== null && bandHasRegimen(band)) {
		const d = bandDoseMg(band, bandWeightKg);
		if (d !== null) bandDailyDoseMg = (d * 24) / (band.intervalH as number);
	}
	const comparedToBand = bandDailyDoseMg === null ? 'unknown' : compareDailyDose(dailyDoseMg, bandDailyDoseMg, bandTolerance);
	trace.push(
		step(
			'band',
			'Renal dose band',
			band === null ? null : bandLabel(band),
			'',
			'band whose [min, max) CrCl range holds the current CrCl',
			[input('CrCl', crclMlMin, 'mL/min', 'step crcl'), input('band daily dose', bandDailyDoseMg, 'mg/d', SOURCES.agentLibrary)],
			SOURCES.agentLibrary,
			band === null ? (crclMlMin === null ? 'no CrCl' : 'no band for this CrCl') : band.note ?? undefined
		),
		step(
			'comparedToBand',
			'Current daily dose against the band',
			comparedToBand,
			'',
			'within when the ratio lies in [1/(1+tol), 1+tol]',
			[
				input('order daily dose', dailyDoseMg, 'mg/d', 'order'),
				input('band daily dose', bandDailyDoseMg, 'mg/d', 'step band'),
				input('tolerance', bandTolerance, '1', settings.bandTolerance === undefined ? 'default' : 'settings')
			],
			SOURCES.commonPractice
		)
	);

	let proposed: ProposedRegimen | null = null;
	let proposalSource: string = SOURCES.agentLibrary;
	let proposalNote: string | undefined;
	if (crclMlMin === null) {
		proposalNote = 'no proposal: no current CrCl';
	} else if (band !== null && band.avoid === true) {
		proposalNote = 'no proposal: agent not recommended in this band' + (band.note ? ' (' + band.note + ')' : '');
	} else if (band !== null && bandHasRegimen(band)) {
		const d = bandDoseMg(band, bandWeightKg);
		if (d === null) proposalNote = 'no proposal: weight-based band without a weight';
		else {
			const interval = band.intervalH as number;
			proposed = {
				doseMg: roundDoseMg(d),
				intervalH: interval,
				infusionH: orderInfusionH <= interval ? orderInfusionH : agent.usualInfusionH,
				loadingDoseMg: null,
				basis: 'renal band ' + bandLabel(band) + '; dose rounded to a practical step'
			};
		}
	} else if (agent.aucTargetMgHL !== null && now !== null && iv) {
		// AUC-guided agents (vancomycin): daily dose for the middle of the AUC24 target from the population CL,
		// interval near the half-life (peak/trough swing about two-fold), at least 8 h.
		const targetAuc = (agent.aucTargetMgHL[0] + agent.aucTargetMgHL[1]) / 2;
		const daily = targetAuc * now.clearanceLPerH;
		let interval = roundIntervalH(now.halfLifeH);
		if (interval < 8) interval = 8;
		proposed = {
			doseMg: roundDoseMg((daily * interval) / 24),
			intervalH: interval,
			infusionH: orderInfusionH <= interval ? orderInfusionH : agent.usualInfusionH,
			loadingDoseMg: null,
			basis:
				'AUC24 target midpoint × population CL; interval near t½ rounded to a practical interval; dose rounded to a practical step' +
				(band !== null && band.note ? '; band: ' + band.note : '')
		};
		proposalSource = SOURCES.aucTarget;
	} else {
		const usual = agent.usualDoseMg ?? (agent.usualDoseMgPerKg !== null && bandWeightKg !== null ? agent.usualDoseMgPerKg * bandWeightKg : null);
		if (usual === null) proposalNote = 'no proposal: weight-based usual dose without a weight';
		else {
			// proposals never exceed the usual regimen: Q capped at 1 here even with possible ARC
			const q = renalAdjustmentFactorRaw(agent.fe, crclMlMin, crclNormalMlMin, false);
			if (agent.adjustBy === 'dose' || q >= 1 - EPS) {
				proposed = {
					doseMg: roundDoseMg(usual * q),
					intervalH: agent.usualIntervalH,
					infusionH: agent.usualInfusionH <= agent.usualIntervalH ? agent.usualInfusionH : agent.usualIntervalH,
					loadingDoseMg: null,
					basis:
						'Giusti–Hayton adjustment of the usual regimen, interval kept; dose rounded to a practical step' +
						(band !== null && band.note ? '; band: ' + band.note : '')
				};
			} else {
				const interval = roundIntervalH(agent.usualIntervalH / q);
				proposed = {
					doseMg: roundDoseMg(usual),
					intervalH: interval,
					infusionH: agent.usualInfusionH <= interval ? agent.usualInfusionH : interval,
					loadingDoseMg: null,
					basis:
						'Giusti–Hayton adjustment of the usual regimen, dose kept; interval rounded to a practical interval' +
						(band !== null && band.note ? '; band: ' + band.note : '')
				};
			}
			proposalSource = SOURCES.giustiHayton;
		}
	}

	let loadingDoseMg: number | null = null;
	if (agent.loadingTargetMgL !== null && now !== null && f > 0) {
		loadingDoseMg = roundDoseMg((now.volumeL * agent.loadingTargetMgL) / f);
		if (proposed !== null) proposed.loadingDoseMg = loadingDoseMg;
	}
	trace.push(
		step(
			'proposed',
			'Proposed regimen',
			proposed === null ? null : proposed.basis,
			'',
			'band regimen; else AUC-target (AUC-guided agents); else Giusti–Hayton (F13) from the usual regimen; doses to practical steps, intervals to 6/8/12/18/24/36/48/72 h',
			[
				input('dose', proposed === null ? null : proposed.doseMg, 'mg', 'proposal'),
				input('interval', proposed === null ? null : proposed.intervalH, 'h', 'proposal'),
				input('infusion', proposed === null ? null : proposed.infusionH, 'h', 'proposal'),
				input('adjust by', agent.adjustBy, '', SOURCES.agentLibrary)
			],
			proposalSource,
			proposalNote === undefined ? PROPOSAL_CAUTION : proposalNote
		)
	);
	if (agent.loadingTargetMgL !== null) {
		trace.push(
			step(
				'loadingDose',
				'Loading dose',
				loadingDoseMg,
				'mg',
				'F10: LD = Vd × C_target (÷ F if not IV), rounded to a practical step',
				[
					input('Vd', now === null ? null : now.volumeL, 'L', 'drug model'),
					input('C_target', agent.loadingTargetMgL, 'mg/L', SOURCES.agentLibrary),
					input('F', f, '1', iv ? 'IV' : SOURCES.agentLibrary)
				],
				SOURCES.oneCompartment,
				loadingDoseMg === null ? exposureNote ?? 'not computed' : PROPOSAL_CAUTION
			)
		);
	}

	return {
		at,
		complete: missing.length === 0,
		missing,
		covariates: {
			ageYears,
			heightCm,
			weightKg,
			idealBodyWeightKg: idealKg,
			adjustedBodyWeightKg: adjustedKg,
			dosingWeightKg: dosingKg,
			weightBasis,
			bsaM2
		},
		creatinine: {
			latestMgDl,
			latestAt,
			ageH: creatinineAgeH,
			baselineMgDl: scan === null ? null : scan.baselineMgDl,
			riseWithin48hMgDl: rise48,
			stable
		},
		renal: {
			crclMlMin,
			crclAtStartMlMin,
			egfrIndexed,
			egfrMlMin,
			kineticGfrMlMin,
			kdigoStage,
			arc
		},
		albumin: {
			latestGL: albuminGL,
			latestAt: albuminRow === null ? null : albuminRow.at,
			unboundFraction: fuNow,
			unboundFractionRef: fuRef
		},
		kinetics: {
			now,
			atStart,
			halfLifeRatio,
			peakMgL,
			troughMgL,
			auc24MgHL
		},
		dosing: {
			dailyDoseMg,
			band,
			bandDailyDoseMg,
			comparedToBand,
			proposed
		},
		trace
	};
}
