// Vancomycin: the patient's own clearance and volume from measured levels at any times, by maximum a
// posteriori (Bayesian) estimation against one published adult population model, given the doses
// actually given; posterior AUC24 now and for a regimen proposed to the AUC window.
//
// Model (default): Buelga DS, Fernández de Gatta MM, Herrera EV, Domínguez-Gil A, García MJ,
// Antimicrob Agents Chemother 2005;49:4934–4941 — one compartment, intermittent infusion:
//   CL (L/h) = 1.08 × CrCl_Cockcroft–Gault (L/h), CV 28.16 %;  V (L) = 0.98 × total body weight (kg), CV 37.15 %
// (both from the abstract). The CL–V correlation (23.12 %) and the additive residual SD (3.52 mg/L) are
// Table 4 values as reproduced in a secondary source, not confirmed against the paper.
// Objective (MAP; Sheiner LB, Beal SL, J Pharm Sci 1982;71:1344–1348, citation from memory):
//   −log posterior = ½ ηᵀ Ω⁻¹ η + Σⱼ [ ½ ((yⱼ − f(tⱼ; CL, V))/σⱼ)² + ln σⱼ ],  CL = CL_pop e^ηCL, V = V_pop e^ηV
import { buildDosingHistory, aucBetween, infusionRunningAt, predictPrepared, prepareTimes } from './dosing-history';
import { ClinicalInputError, requireDate, requireFinite, requirePositive } from './errors';
import { predictExposure } from './exposure';
import type {
	DosingHistory,
	DrugLevel,
	ExcludedLevel,
	FittedLevel,
	LevelCovariates,
	LevelProposal,
	PopulationPkModel,
	VancomycinFit,
	VancomycinFitInput
} from './levels-types';
import { LEVEL_TIMINGS } from './levels-types';
import { hessian, minimiseWithRestarts } from './optimise';
import { aucRegimen, chooseInfusionH } from './proposal';
import { proposalViolations } from './proposal-invariants';
import type { ReferenceRegimen } from './reference-regimen';
import { HOUR_MS } from './timeline';
import { input, SOURCES, step } from './trace';
import type { AgentParams, KineticsSnapshot, ProposedRegimen, TherapyContext, TraceStep } from './types';

export const LEVEL_SOURCES = {
	buelga: 'Buelga DS, Fernández de Gatta MM, Herrera EV, Domínguez-Gil A, García MJ, Antimicrob Agents Chemother 2005;49:4934–4941',
	map: 'maximum a posteriori estimation: Sheiner LB, Beal SL, J Pharm Sci 1982;71:1344–1348 (citation from memory)',
	nelderMead: 'Nelder JA, Mead R, Comput J 1965;7:308–313',
	levelTiming: 'common practice (a trough is drawn before a dose; a level before the first dose or a trough during an infusion cannot be fitted)'
} as const;

/** Default AUC24 window when neither the caller nor the agent gives one, mg·h/L (Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864, from memory). */
export const DEFAULT_AUC_WINDOW_MG_H_L: [number, number] = [400, 600];
/** A level drawn this soon after the end of an infusion may still be in the distribution phase (common practice; Buelga 2005 drew peaks ≥ 2 h after). */
export const DISTRIBUTION_PHASE_H = 1;

/** log-normal variance from a coefficient of variation: ω² = ln(1 + CV²) */
const omega2 = (cv: number) => Math.log(1 + cv * cv);

/**
 * Buelga 2005 general model (one compartment). CrCl by Cockcroft–Gault in L/h (mL/min × 0.06); V on total body
 * weight. Studied range: CrCl 89.4 ± 39.2 mL/min, weight 64.7 ± 11.3 kg (mean ± SD, Table 1 as reproduced in a
 * secondary source); adults with haematological malignancies, ICU patients excluded.
 */
export const BUELGA_2005: PopulationPkModel = {
	name: 'Buelga 2005 (one compartment)',
	citation: LEVEL_SOURCES.buelga,
	typicalClearanceLPerH: (c) => 1.08 * c.crclMlMin * 0.06,
	typicalVolumeL: (c) => 0.98 * c.weightKg,
	clearanceFormula: 'CL (L/h) = 1.08 × CrCl (mL/min × 0.06)',
	volumeFormula: 'V (L) = 0.98 × total body weight (kg)',
	omegaClearance2: omega2(0.2816),
	omegaVolume2: omega2(0.3715),
	omegaCovariance: 0.2312 * Math.sqrt(omega2(0.2816) * omega2(0.3715)),
	residualAdditiveMgL: 3.52,
	residualProportional: 0,
	studied: {
		crclMlMin: [89.4 - 2 * 39.2, 89.4 + 2 * 39.2],
		weightKg: [64.7 - 2 * 11.3, 64.7 + 2 * 11.3],
		note: 'adults with haematological malignancies, ICU patients excluded'
	},
	provenance:
		'CL and V equations and their CV (28.16 %, 37.15 %) from the abstract; CL–V correlation 23.12 % and additive residual SD 3.52 mg/L from Table 4 as reproduced in a secondary source (not confirmed against the paper); ω² = ln(1 + CV²)'
};

/** Why a level cannot be fitted, or null. Levels labelled trough are checked against recorded infusions only. */
function impossibleTime(level: DrugLevel, tMs: number, atMs: number, history: DosingHistory): string | null {
	if (!(level.mgL > 0)) return 'not a positive concentration (a level below the limit of quantification is not fitted)';
	if (tMs > atMs) return 'drawn after the assessment time';
	if (history.doses.length === 0 || tMs <= history.doses[0].startMs) return 'drawn before the first dose';
	if (level.timing === 'trough') {
		const running = infusionRunningAt(
			history.doses.filter((d) => d.source === 'given'),
			tMs
		);
		if (running !== null) return `labelled trough but drawn during the infusion started ${new Date(running.startMs).toISOString()}`;
	}
	return null;
}

function levelNote(tMs: number, level: DrugLevel, history: DosingHistory): string | undefined {
	const notes: string[] = [];
	const running = infusionRunningAt(history.doses, tMs);
	if (running !== null && running.source === 'scheduled') notes.push('drawn during a scheduled infusion with no recorded administration: timing uncertain');
	else if (running !== null && level.timing === 'peak') notes.push('labelled peak but drawn during the infusion');
	for (const d of history.doses) {
		const endMs = d.startMs + d.durationH * HOUR_MS;
		if (d.durationH > 0 && tMs >= endMs && tMs - endMs < DISTRIBUTION_PHASE_H * HOUR_MS) {
			notes.push(`drawn within ${DISTRIBUTION_PHASE_H} h of the end of an infusion: may be in the distribution phase`);
			break;
		}
	}
	return notes.length > 0 ? notes.join('; ') : undefined;
}

export function checkLevels(levels: readonly DrugLevel[]): void {
	if (!Array.isArray(levels)) throw new ClinicalInputError('levels', levels, 'must be an array');
	levels.forEach((l, i) => {
		if (l == null || typeof l !== 'object') throw new ClinicalInputError(`levels[${i}]`, l, 'must be an object');
		requireDate(`levels[${i}].at`, l.at);
		requireFinite(`levels[${i}].mgL`, l.mgL);
		if (!(LEVEL_TIMINGS as readonly string[]).includes(l.timing))
			throw new ClinicalInputError(`levels[${i}].timing`, l.timing, `must be one of ${LEVEL_TIMINGS.join(', ')}`);
	});
}

const snapshot = (clearanceLPerH: number, volumeL: number): KineticsSnapshot => {
	const kPerH = clearanceLPerH / volumeL;
	return { clearanceLPerH, volumeL, kPerH, halfLifeH: Math.LN2 / kPerH };
};

/** The negative log posterior of η for these levels (exported for tests and for an independent check). */
export function vancomycinObjective(args: {
	model: PopulationPkModel;
	covariates: LevelCovariates;
	history: DosingHistory;
	levels: readonly { atMs: number; mgL: number }[];
}): { f: (eta: number[]) => number; predict: (eta: number[]) => Float64Array; prior: KineticsSnapshot } {
	const { model } = args;
	const clPop = model.typicalClearanceLPerH(args.covariates);
	const vPop = model.typicalVolumeL(args.covariates);
	const prepared = prepareTimes(
		args.history.doses,
		args.levels.map((l) => l.atMs)
	);
	const observed = Float64Array.from(args.levels, (l) => l.mgL);
	const det = model.omegaClearance2 * model.omegaVolume2 - model.omegaCovariance * model.omegaCovariance;
	if (!(det > 0)) throw new ClinicalInputError('model.omega', det, 'must be positive definite');
	// Ω⁻¹ for the 2 × 2 case
	const i11 = model.omegaVolume2 / det;
	const i22 = model.omegaClearance2 / det;
	const i12 = -model.omegaCovariance / det;
	const out = new Float64Array(observed.length);
	const add2 = model.residualAdditiveMgL * model.residualAdditiveMgL;
	const prop2 = model.residualProportional * model.residualProportional;
	const predict = (eta: number[]) => {
		const cl = clPop * Math.exp(eta[0]);
		const v = vPop * Math.exp(eta[1]);
		return predictPrepared(prepared, cl / v, v, new Float64Array(observed.length));
	};
	const f = (eta: number[]) => {
		const cl = clPop * Math.exp(eta[0]);
		const v = vPop * Math.exp(eta[1]);
		let nlp = 0.5 * (i11 * eta[0] * eta[0] + 2 * i12 * eta[0] * eta[1] + i22 * eta[1] * eta[1]);
		predictPrepared(prepared, cl / v, v, out);
		for (let j = 0; j < observed.length; j++) {
			const variance = add2 + prop2 * out[j] * out[j];
			const r = observed[j] - out[j];
			nlp += (0.5 * r * r) / variance + 0.5 * Math.log(variance);
		}
		return nlp;
	};
	return { f, predict, prior: snapshot(clPop, vPop) };
}

const fmt = (n: number, digits = 2) => n.toFixed(digits);

/** Reference used to check a level-based proposal against the proposal invariants. */
export function levelReference(aucGuided: boolean, label: string): ReferenceRegimen {
	return {
		kind: 'band',
		label,
		indication: null,
		doseMg: null,
		fixedDose: false,
		intervalH: null,
		afterEachSession: false,
		dailyDoseMg: null,
		aucGuided,
		levelGuided: false,
		avoid: false,
		note: 'individual kinetics from measured levels',
		unadjusted: false,
		topDailyDoseMg: null,
		reductionDeferred: false
	};
}

/** Therapy context of a running intravenous order with levels (no loading dose belongs here). */
export function runningIvTherapy(history: DosingHistory, atMs: number): TherapyContext {
	const first = history.doses.length > 0 ? history.doses[0].startMs : atMs;
	return {
		route: 'iv',
		systemic: true,
		bioavailability: 1,
		dayOfTherapy: Math.floor((atMs - first) / (24 * HOUR_MS)) + 1,
		dosesGiven: history.doses.filter((d) => d.startMs <= atMs).length,
		newOrder: false,
		restarted: false,
		extendedInfusion: false
	};
}

function proposeToWindow(
	agent: AgentParams,
	window: [number, number],
	kinetics: KineticsSnapshot,
	history: DosingHistory,
	atMs: number,
	orderInfusionH: number
): LevelProposal {
	const windowAgent: AgentParams = { ...agent, aucTargetMgHL: window };
	const regimen = aucRegimen(windowAgent, kinetics);
	if ('reason' in regimen) return { proposed: null, reason: regimen.reason };
	const infusionH = chooseInfusionH(agent, 'iv', regimen.doseMg, regimen.intervalH, orderInfusionH);
	if (infusionH === null)
		return { proposed: null, reason: `the dose of ${regimen.doseMg} mg cannot be infused within the interval at the agent's maximum rate` };
	const therapy = runningIvTherapy(history, atMs);
	const proposed: ProposedRegimen = {
		doseMg: regimen.doseMg,
		intervalH: regimen.intervalH,
		infusionH,
		loadingDoseMg: null,
		basis: `AUC24 window ${window[0]}–${window[1]} mg·h/L from the individual (MAP) clearance ${fmt(kinetics.clearanceLPerH)} L/h; daily dose rounded up to the ${agent.doseStepMg}-mg step`,
		predicted: predictExposure({ doseMg: regimen.doseMg, intervalH: regimen.intervalH, infusionH }, kinetics, 1, true)
	};
	const violations = proposalViolations(
		{ agent: windowAgent, route: 'iv', reference: levelReference(true, 'AUC24 window from measured levels'), therapy, kinetics, weightKg: null },
		proposed
	);
	if (violations.length > 0) return { proposed: null, reason: `withheld: ${violations.join('; ')}` };
	return { proposed, reason: null };
}

/**
 * MAP fit of vancomycin CL and V for one order. Levels at impossible times are not fitted and come back in
 * `excluded` with the reason; with no fitted level the estimate is the population prior.
 */
export function fitVancomycinLevels(args: VancomycinFitInput): VancomycinFit {
	const atMs = requireDate('at', args.at);
	const model = args.model ?? BUELGA_2005;
	const crclMlMin = requirePositive('covariates.crclMlMin', args.covariates?.crclMlMin);
	const weightKg = requirePositive('covariates.weightKg', args.covariates?.weightKg);
	const covariates = { crclMlMin, weightKg };
	checkLevels(args.levels);
	const window = args.aucWindowMgHL ?? args.agent.aucTargetMgHL ?? DEFAULT_AUC_WINDOW_MG_H_L;
	if (!(window[0] > 0 && window[1] > window[0])) throw new ClinicalInputError('aucWindowMgHL', window, 'must be [low, high] with 0 < low < high');
	const history = buildDosingHistory({ at: args.at, administrations: args.administrations, schedule: args.schedule });
	const trace: TraceStep[] = [...history.trace];

	// ── which levels can be fitted ─────────────────────────────────────────────────────────────────
	const excluded: ExcludedLevel[] = [];
	const usable: { level: DrugLevel; atMs: number; note?: string }[] = [];
	for (const level of [...args.levels].sort((a, b) => a.at.getTime() - b.at.getTime())) {
		const tMs = level.at.getTime();
		const reason = impossibleTime(level, tMs, atMs, history);
		if (reason !== null) excluded.push({ level, reason });
		else usable.push({ level, atMs: tMs, note: levelNote(tMs, level, history) });
	}
	for (const e of excluded) {
		trace.push(
			step(
				'levelExcluded',
				'Level not fitted',
				e.level.mgL,
				'mg/L',
				'levels at impossible times are not fitted',
				[input('drawn at', e.level.at.toISOString(), '', SOURCES.record), input('labelled', e.level.timing, '', SOURCES.record)],
				LEVEL_SOURCES.levelTiming,
				e.reason
			)
		);
	}

	// ── prior ──────────────────────────────────────────────────────────────────────────────────────
	const objective = vancomycinObjective({ model, covariates, history, levels: usable.map((u) => ({ atMs: u.atMs, mgL: u.level.mgL })) });
	const prior = objective.prior;
	const outside: string[] = [];
	if (crclMlMin < model.studied.crclMlMin[0] || crclMlMin > model.studied.crclMlMin[1]) outside.push(`CrCl ${fmt(crclMlMin, 0)} mL/min`);
	if (weightKg < model.studied.weightKg[0] || weightKg > model.studied.weightKg[1]) outside.push(`weight ${fmt(weightKg, 0)} kg`);
	const priorNote =
		outside.length > 0
			? `${outside.join(' and ')} outside the range the model was built on (mean ± 2 SD; ${model.studied.note}): the prior is less reliable`
			: `model built on ${model.studied.note}`;
	trace.push(
		step(
			'levelPriorClearance',
			'Vancomycin clearance, population prior',
			prior.clearanceLPerH,
			'L/h',
			model.clearanceFormula,
			[input('CrCl (Cockcroft–Gault)', crclMlMin, 'mL/min', 'covariates')],
			model.citation,
			priorNote
		),
		step(
			'levelPriorVolume',
			'Vancomycin volume, population prior',
			prior.volumeL,
			'L',
			model.volumeFormula,
			[input('total body weight', weightKg, 'kg', 'covariates')],
			model.citation,
			model.provenance
		)
	);

	// ── MAP ────────────────────────────────────────────────────────────────────────────────────────
	const sdCl = Math.sqrt(model.omegaClearance2);
	const sdV = Math.sqrt(model.omegaVolume2);
	const atPrior = objective.f([0, 0]);
	let eta = [0, 0];
	let atMap = atPrior;
	let evaluations = 1;
	let post = { clearance: sdCl, volume: sdV };
	if (usable.length > 0) {
		const starts = [
			[0, 0],
			[sdCl, sdV],
			[-sdCl, -sdV],
			[sdCl, -sdV],
			[-sdCl, sdV]
		];
		const best = minimiseWithRestarts(objective.f, starts, [0.5 * sdCl, 0.5 * sdV]);
		eta = best.x;
		atMap = best.f;
		evaluations += best.evaluations;
		const H = hessian(objective.f, eta);
		const det = H[0][0] * H[1][1] - H[0][1] * H[1][0];
		if (det > 0 && H[0][0] > 0) post = { clearance: Math.sqrt(H[1][1] / det), volume: Math.sqrt(H[0][0] / det) };
	}
	const individual = snapshot(prior.clearanceLPerH * Math.exp(eta[0]), prior.volumeL * Math.exp(eta[1]));
	const priorPred = objective.predict([0, 0]);
	const mapPred = objective.predict(eta);
	const fitted: FittedLevel[] = usable.map((u, j) => {
		const sd = Math.sqrt(model.residualAdditiveMgL ** 2 + (model.residualProportional * mapPred[j]) ** 2);
		return {
			level: u.level,
			tH: (u.atMs - history.doses[0].startMs) / HOUR_MS,
			predictedPriorMgL: priorPred[j],
			predictedMgL: mapPred[j],
			residualMgL: u.level.mgL - mapPred[j],
			weightedResidual: (u.level.mgL - mapPred[j]) / sd,
			...(u.note ? { note: u.note } : {})
		};
	});
	for (const r of fitted) {
		trace.push(
			step(
				'levelResidual',
				'Measured level against the fit',
				r.residualMgL,
				'mg/L',
				'residual = measured − predicted (individual fit)',
				[
					input('drawn at', r.level.at.toISOString(), '', SOURCES.record),
					input('labelled', r.level.timing, '', SOURCES.record),
					input('measured', r.level.mgL, 'mg/L', SOURCES.record),
					input('predicted by the prior', r.predictedPriorMgL, 'mg/L', 'step levelPriorClearance'),
					input('predicted by the fit', r.predictedMgL, 'mg/L', 'step levelMapClearance'),
					input('weighted residual', r.weightedResidual, '1', 'residual / residual SD')
				],
				LEVEL_SOURCES.map,
				r.note
			)
		);
	}
	const clearanceRatio = individual.clearanceLPerH / prior.clearanceLPerH;
	const volumeRatio = individual.volumeL / prior.volumeL;
	const clearanceInformation = Math.max(0, 1 - (post.clearance * post.clearance) / model.omegaClearance2);
	const statement =
		fitted.length === 0
			? excluded.length > 0
				? `No level could be fitted (${excluded.length} at impossible times): the estimate is the population prior for these covariates.`
				: 'No level measured: the estimate is the population prior for these covariates.'
			: `${fitted.length} level${fitted.length === 1 ? '' : 's'} moved clearance from ${fmt(prior.clearanceLPerH)} to ${fmt(individual.clearanceLPerH)} L/h (×${fmt(clearanceRatio)}, ${fmt(Math.abs(eta[0]) / sdCl, 1)} prior SD) and volume from ${fmt(prior.volumeL, 1)} to ${fmt(individual.volumeL, 1)} L (×${fmt(volumeRatio)}); the levels carry ${Math.round(100 * clearanceInformation)} % of what is known about this patient's clearance, the population prior the rest (posterior SD of ηCL ${fmt(post.clearance)} against ${fmt(sdCl)} before the levels).`;
	const levelsInput = input('levels fitted', fitted.length, 'levels', SOURCES.record);
	trace.push(
		step(
			'levelObjective',
			'Negative log posterior at the estimate',
			atMap,
			'1',
			'½ ηᵀΩ⁻¹η + Σ [½ ((measured − predicted)/σ)² + ln σ]; minimised over (ηCL, ηV) by Nelder–Mead from five starts with restarts',
			[
				levelsInput,
				input('at the prior', atPrior, '1', 'η = 0'),
				input('evaluations', evaluations, '1', 'computed'),
				input('residual SD (additive)', model.residualAdditiveMgL, 'mg/L', model.citation),
				input('residual SD (proportional)', model.residualProportional, '1', model.citation)
			],
			`${LEVEL_SOURCES.map}; ${LEVEL_SOURCES.nelderMead}`
		),
		step(
			'levelMapClearance',
			'Vancomycin clearance, individual (MAP)',
			individual.clearanceLPerH,
			'L/h',
			'CL = CL_prior × e^ηCL',
			[
				input('CL prior', prior.clearanceLPerH, 'L/h', 'step levelPriorClearance'),
				input('ηCL', eta[0], '1', 'step levelObjective'),
				input('ω CL', sdCl, '1', model.citation),
				levelsInput
			],
			LEVEL_SOURCES.map,
			statement
		),
		step(
			'levelMapVolume',
			'Vancomycin volume, individual (MAP)',
			individual.volumeL,
			'L',
			'V = V_prior × e^ηV',
			[input('V prior', prior.volumeL, 'L', 'step levelPriorVolume'), input('ηV', eta[1], '1', 'step levelObjective'), input('ω V', sdV, '1', model.citation)],
			LEVEL_SOURCES.map
		),
		step(
			'levelK',
			'Elimination rate constant, individual',
			individual.kPerH,
			'/h',
			'k = CL / V',
			[input('CL', individual.clearanceLPerH, 'L/h', 'step levelMapClearance'), input('V', individual.volumeL, 'L', 'step levelMapVolume')],
			SOURCES.oneCompartment
		),
		step(
			'levelHalfLife',
			'Half-life, individual',
			individual.halfLifeH,
			'h',
			't½ = ln2 / k',
			[input('k', individual.kPerH, '/h', 'step levelK')],
			SOURCES.oneCompartment
		),
		step(
			'levelInformation',
			'Share of the clearance estimate carried by the levels',
			clearanceInformation,
			'1',
			'1 − posterior var(ηCL) / ω²CL (posterior variance from the inverse Hessian at the estimate)',
			[
				input('posterior SD ηCL', post.clearance, '1', 'computed'),
				input('ω CL', sdCl, '1', model.citation),
				input('CL individual / prior', clearanceRatio, '1', 'computed')
			],
			LEVEL_SOURCES.map,
			statement
		)
	);

	// ── exposure and proposal ──────────────────────────────────────────────────────────────────────
	const schedule = args.schedule;
	const dailyDoseMg = (requirePositive('schedule.doseMg', schedule.doseMg) * 24) / requirePositive('schedule.intervalH', schedule.intervalH);
	const auc24CurrentMgHL = dailyDoseMg / individual.clearanceLPerH;
	const auc24LastDayMgHL = aucBetween(history.doses, individual.clearanceLPerH, individual.volumeL, atMs - 24 * HOUR_MS, atMs);
	const proposal = proposeToWindow(args.agent, window, individual, history, atMs, schedule.infusionH);
	trace.push(
		step(
			'levelAuc24Current',
			'AUC24 at steady state, current regimen (individual)',
			auc24CurrentMgHL,
			'mg·h/L',
			'AUC24 = daily dose / CL',
			[
				input('daily dose', dailyDoseMg, 'mg', 'order'),
				input('CL', individual.clearanceLPerH, 'L/h', 'step levelMapClearance'),
				input('window', `${window[0]}–${window[1]}`, 'mg·h/L', args.aucWindowMgHL ? 'rule parameter' : SOURCES.aucTarget)
			],
			SOURCES.oneCompartment
		),
		step(
			'levelAuc24LastDay',
			'AUC over the last 24 h, doses in the history (individual)',
			auc24LastDayMgHL,
			'mg·h/L',
			'AUC(a, b) = (amount infused in [a, b] − V·(C(b) − C(a))) / CL',
			[input('CL', individual.clearanceLPerH, 'L/h', 'step levelMapClearance'), input('V', individual.volumeL, 'L', 'step levelMapVolume')],
			SOURCES.oneCompartment,
			history.assumedCount > 0 ? 'includes doses assumed given as ordered' : undefined
		),
		step(
			'levelProposal',
			'Regimen to the AUC24 window (individual)',
			proposal.proposed === null ? null : `${proposal.proposed.doseMg} mg every ${proposal.proposed.intervalH} h over ${proposal.proposed.infusionH} h`,
			'',
			'shortest of 12, 24, 48 h whose daily-dose grid fits the window; daily dose = (low + 12.5 % of the width) × CL rounded up; checked against the proposal invariants',
			[
				input('CL', individual.clearanceLPerH, 'L/h', 'step levelMapClearance'),
				input('window', `${window[0]}–${window[1]}`, 'mg·h/L', args.aucWindowMgHL ? 'rule parameter' : SOURCES.aucTarget),
				input('predicted AUC24', proposal.proposed?.predicted?.auc24MgHL ?? null, 'mg·h/L', 'computed')
			],
			SOURCES.aucTarget,
			proposal.reason ?? undefined
		)
	);

	return {
		prior,
		individual,
		eta: { clearance: eta[0], volume: eta[1] },
		posteriorSd: post,
		clearanceRatio,
		volumeRatio,
		clearanceInformation,
		statement,
		objective: { atPrior, atMap, evaluations },
		fitted,
		excluded,
		auc24CurrentMgHL,
		auc24LastDayMgHL,
		aucWindowMgHL: window,
		proposal,
		history,
		trace
	};
}
