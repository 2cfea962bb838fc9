// Types of the measured-level core: doses actually given, drug levels, and what the fits return.
// Shaped so that assess() can call the fits with { administrations, levels, covariates, agent }.
// Numbers carry their unit in their name (conventions.md §10).
import type { AgentParams, KineticsSnapshot, ProposedRegimen, TraceStep } from './types';

/** One dose actually given (a medication administration from the feed), or one recorded as not given. */
export type Administration = {
	id?: string;
	startAt: Date;
	/** end of the infusion; null or equal to startAt = bolus */
	endAt: Date | null;
	doseMg: number;
	/** the ward recorded this scheduled dose as not given (held, refused): it adds no drug, and the schedule does not assume it */
	notGiven?: boolean;
};

/** The order's schedule, used where administrations are missing. */
export type DosingSchedule = {
	/** first scheduled dose */
	startAt: Date;
	intervalH: number;
	doseMg: number;
	infusionH: number;
	/** no scheduled doses from this time (stopped order); null = still running */
	stopAt?: Date | null;
};

export const LEVEL_TIMINGS = ['trough', 'peak', 'random'] as const;
/** How the sample was labelled by the feed (LOINC trough / peak / unspecified timing). */
export type LevelTiming = (typeof LEVEL_TIMINGS)[number];

/** One measured serum (or plasma) concentration, mg/L. */
export type DrugLevel = {
	id?: string;
	at: Date;
	mgL: number;
	timing: LevelTiming;
};

/** A dose as the kinetics use it: times in ms, where it came from. */
export type HistoryDose = {
	startMs: number;
	/** infusion duration, h (0 = bolus) */
	durationH: number;
	doseMg: number;
	source: 'given' | 'scheduled';
	administrationId?: string;
};

export type DosingHistory = {
	doses: HistoryDose[];
	givenCount: number;
	/** scheduled doses with no recorded administration, assumed given as ordered */
	assumedCount: number;
	/** scheduled doses the record says were not given (held, refused): no drug, and not assumed */
	notGivenCount: number;
	notes: string[];
	trace: TraceStep[];
};

/** A level the fit did not use, and why. */
export type ExcludedLevel = { level: DrugLevel; reason: string };

/** A level the fit used, with its prediction afterwards. */
export type FittedLevel = {
	level: DrugLevel;
	/** hours since the first dose */
	tH: number;
	predictedPriorMgL: number;
	predictedMgL: number;
	/** observed − predicted (individual), mg/L */
	residualMgL: number;
	/** residual / the residual SD at this prediction */
	weightedResidual: number;
	note?: string;
};

/** Covariates of the population model (Buelga 2005: Cockcroft–Gault CrCl and total body weight). */
export type LevelCovariates = {
	/** Cockcroft–Gault creatinine clearance, mL/min */
	crclMlMin: number;
	/** total (actual) body weight, kg */
	weightKg: number;
};

/**
 * A one-compartment population model with log-normal inter-individual variability on CL and V
 * (CLᵢ = CL_pop e^ηCL, Vᵢ = V_pop e^ηV, η ~ N(0, Ω)) and a combined residual error
 * (SD = sqrt(additive² + (proportional × prediction)²)).
 */
export type PopulationPkModel = {
	name: string;
	citation: string;
	/** typical CL, L/h, for the covariates */
	typicalClearanceLPerH: (c: LevelCovariates) => number;
	/** typical V, L, for the covariates */
	typicalVolumeL: (c: LevelCovariates) => number;
	clearanceFormula: string;
	volumeFormula: string;
	/** variance of ηCL and ηV, and their covariance */
	omegaClearance2: number;
	omegaVolume2: number;
	omegaCovariance: number;
	residualAdditiveMgL: number;
	residualProportional: number;
	/** what the model's studied population looked like, for the trace's cautions */
	studied: { crclMlMin: [number, number]; weightKg: [number, number]; note: string };
	/** values taken from a secondary reproduction or recalled, named for the trace */
	provenance: string;
};

/** A regimen proposed from individual kinetics, or none with the reason. */
export type LevelProposal = { proposed: ProposedRegimen | null; reason: string | null };

export type VancomycinFitInput = {
	at: Date;
	agent: AgentParams;
	administrations: Administration[];
	levels: DrugLevel[];
	/** the order's schedule (fallback for missing administrations, and the current regimen) */
	schedule: DosingSchedule;
	covariates: LevelCovariates;
	/** AUC24 window, mg·h/L (a rule parameter; default the agent's target or 400–600) */
	aucWindowMgHL?: [number, number];
	/** another population model (tests, or a later choice by the institution); default Buelga 2005 */
	model?: PopulationPkModel;
};

export type VancomycinFit = {
	/** the population (prior) estimate for these covariates */
	prior: KineticsSnapshot;
	/** maximum a posteriori individual estimate (equal to the prior when no level was fitted) */
	individual: KineticsSnapshot;
	eta: { clearance: number; volume: number };
	/** approximate posterior SD of ηCL and ηV (inverse Hessian at the MAP) */
	posteriorSd: { clearance: number; volume: number };
	/** individual CL / prior CL */
	clearanceRatio: number;
	volumeRatio: number;
	/** 1 − posterior var / prior var of ηCL: 0 = the levels told nothing, → 1 = the levels decided */
	clearanceInformation: number;
	/** one sentence on how far the levels moved the estimate from the prior */
	statement: string;
	objective: { atPrior: number; atMap: number; evaluations: number };
	fitted: FittedLevel[];
	excluded: ExcludedLevel[];
	/** AUC24 at steady state of the current regimen with the individual CL, mg·h/L */
	auc24CurrentMgHL: number;
	/** AUC over the 24 h before `at` from the doses in the history, mg·h/L */
	auc24LastDayMgHL: number;
	aucWindowMgHL: [number, number];
	proposal: LevelProposal;
	history: DosingHistory;
	trace: TraceStep[];
};

export type AminoglycosideTargets = {
	/** steady-state peak at the end of the infusion, mg/L (default the agent's peak target) */
	peakMgL: number;
	/** steady-state trough before the next dose must not exceed this, mg/L (default the agent's trough limit) */
	troughMgL: number;
};

export type AminoglycosideLevelsInput = {
	at: Date;
	agent: AgentParams;
	administrations: Administration[];
	levels: DrugLevel[];
	schedule: DosingSchedule;
	/** the agent's Vd-basis weight, kg: for the per-kg volume and the usual maximum daily dose */
	weightKg: number | null;
	targets?: Partial<AminoglycosideTargets>;
};

export type AminoglycosideLevels = {
	/** two levels after one dose, or one after an extended-interval dose (population volume); null without kinetics */
	method: 'two-level' | 'single-level' | null;
	/** null when the levels do not allow the calculation (reason says why) */
	kinetics: KineticsSnapshot | null;
	reason: string | null;
	/** the dose the two levels follow */
	dose: HistoryDose | null;
	/** levels used (two after the dose, and a pre-dose level when drawn) */
	used: DrugLevel[];
	excluded: ExcludedLevel[];
	/** concentration at the start of the dose (measured, or predicted from earlier doses), mg/L */
	preDoseMgL: number | null;
	/** extrapolated true peak at the end of the infusion and true trough before the next dose, mg/L */
	truePeakMgL: number | null;
	trueTroughMgL: number | null;
	volumePerKg: number | null;
	targets: AminoglycosideTargets | null;
	proposal: LevelProposal;
	history: DosingHistory;
	trace: TraceStep[];
};
