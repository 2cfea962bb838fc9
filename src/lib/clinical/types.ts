// Types shared by the clinical core, the rules, the worker and the pages.
// Numbers carry their unit in their name (conventions.md §10).
import type { Administration, DosingSchedule, DrugLevel, LevelTiming } from './levels-types';

export const SEXES = ['female', 'male'] as const;
export type Sex = (typeof SEXES)[number];

export type Creatinine = { value: number; unit: 'mg/dL' | 'umol/L' };

export type WeightBasis = 'actual' | 'ideal' | 'adjusted';

/** Where a parameter value came from (clinical-reference §5 row tags and §2 source tags). */
export type Provenance = 'P' | 'S' | 'L' | 'Ls' | 'M' | 'CP';

/**
 * One renal dose band of an agent: the regimen that fits a Cockcroft–Gault CrCl in
 * [minCrclMlMin, maxCrclMlMin). null bounds are open. A band without a dose is "level-guided"
 * (aminoglycosides below 20 mL/min) or "not recommended".
 */
export type DoseBand = {
	minCrclMlMin: number | null;
	maxCrclMlMin: number | null;
	/** fixed dose per administration, mg */
	doseMg: number | null;
	/** weight-based dose per administration, mg/kg of the agent's dosing weight */
	doseMgPerKg: number | null;
	intervalH: number | null;
	/** e.g. "level-guided", "not recommended", "750 mg once, then 500 mg q48h" */
	note: string | null;
	/** true when the agent is not recommended in this band: no regimen is proposed */
	avoid?: boolean;
	/** true when the band's regimen is computed from the agent's AUC24 target (vancomycin), not fixed */
	aucGuided?: boolean;
};

export type PopulationModel = 'generic' | 'vancomycin' | 'aminoglycoside';

export const ROUTES = ['iv', 'po', 'im'] as const;
export type Route = (typeof ROUTES)[number];

/**
 * How an agent behaves by one route. `systemic: false` means the route is not absorbed (oral
 * vancomycin acts in the gut): no systemic assessment, no renal rules, no proposal.
 * `renalBands`: 'iv' = the IV bands apply unchanged (bioequivalent oral forms); a list = this
 * route's own bands; null = the library has no regimen for this route (no comparison, no proposal).
 */
export type RouteParams = {
	bioavailability: number;
	systemic: boolean;
	renalBands: 'iv' | DoseBand[] | null;
	/** this route's usual maximum daily dose, mg, when it differs from the agent's */
	usualMaxDailyDoseMg?: number | null;
	note: string | null;
};

export const RENAL_REPLACEMENT_MODES = ['ihd', 'pd', 'crrt'] as const;
/** Intermittent haemodialysis, peritoneal dialysis, continuous renal replacement therapy. */
export type RenalReplacementMode = (typeof RENAL_REPLACEMENT_MODES)[number];

/** A period on renal replacement therapy; `to` null while it continues. */
export type RenalReplacementEpisode = { mode: RenalReplacementMode; from: Date; to: Date | null };

/**
 * The agent's regimen on one kind of renal replacement therapy (a band kind beside the CrCl bands).
 * A regimen without dose is level-guided or not recommended (`avoid`); `note` says which and why.
 */
export type RenalReplacementRegimen = {
	doseMg: number | null;
	doseMgPerKg: number | null;
	intervalH: number | null;
	/** given after each intermittent dialysis session (thrice weekly) rather than on a fixed interval */
	afterEachSession?: boolean;
	note: string | null;
	avoid?: boolean;
};

/**
 * A regimen for a named indication (meningitis doses, a lower "other infections" dose), with its own
 * renal bands when they differ. An order whose daily dose matches it is compared with it, not with
 * the default bands, so an indication dose is never "cut" for renal reasons it does not have.
 */
export type IndicationRegimen = {
	label: string;
	doseMg: number | null;
	doseMgPerKg: number | null;
	intervalH: number;
	renalBands: DoseBand[] | null;
	/** the regimen applies only up to this day of therapy (teicoplanin's loading doses); null = any day */
	untilDay?: number | null;
};

export type AgentParams = {
	code: string; // ATC code, e.g. J01XA01
	name: string;
	/** fraction excreted unchanged in urine, 0..1 */
	fe: number;
	/** plasma protein binding fraction at albuminRefGL, 0..1 */
	proteinBinding: number;
	albuminRefGL: number;
	vdLPerKg: number;
	vdWeightBasis: WeightBasis | 'dosing';
	halfLifeNormalH: number;
	model: PopulationModel;
	/** usual regimen with normal renal function */
	usualDoseMg: number | null;
	usualDoseMgPerKg: number | null;
	usualIntervalH: number;
	usualInfusionH: number;
	renalBands: DoseBand[];
	/**
	 * true when the agent's dose depends on renal function (its bands differ). Explicit, not inferred
	 * from fe: ceftriaxone is half renally excreted yet needs no renal adjustment; ertapenem's fe is 0.38
	 * yet it has a renal band. The renal-state rules apply to renally adjusted agents (and nephrotoxic ones).
	 */
	renallyAdjusted: boolean;
	/** how the Giusti–Hayton drug model applies Q when kinetics are shown: dose or interval */
	adjustBy: 'dose' | 'interval';
	troughMaxMgL: number | null;
	aucTargetMgHL: [number, number] | null;
	/** loading dose = Vd × target (new orders only); null = the agent has no loading dose */
	loadingTargetMgL: number | null;
	/** target peak of extended-interval dosing, mg/L (shown on the concentration chart); null = none */
	peakTargetMgL?: number | null;
	/** an aminoglycoside dosed every 24 h or longer may be read from one level after a dose, with the population volume */
	singleLevelExtendedInterval?: boolean;
	/** loading-dose window on the Vd weight basis, mg/kg (vancomycin 20–35 mg/kg, Rybak 2020) */
	loadingMinMgPerKg: number | null;
	loadingMaxMgPerKg: number | null;
	/** loading-dose cap, mg (vancomycin 3,000 mg, Rybak 2020) */
	loadingMaxMg: number | null;
	nephrotoxic: boolean;
	/** creatinine older than this makes the renal estimate stale */
	maxCreatinineAgeH: number;
	/** oral bioavailability (kept for the editor; routes.po.bioavailability is what assess() reads) */
	bioavailability: number;
	/** per-route behaviour; a route missing here has no regimen in the library */
	routes: Partial<Record<Route, RouteParams>>;
	/** computed doses (mg/kg, AUC-targeted) round to this step, mg (vial and syringe sizes) */
	doseStepMg: number;
	/** largest dose per administration the library proposes, mg; null = no limit beyond the bands */
	maxDoseMg: number | null;
	/** fastest infusion the library proposes, mg/h (vancomycin 10 mg/min); null = no limit */
	maxInfusionRateMgPerH: number | null;
	/** usual maximum daily dose (mg or mg/kg on the Vd weight basis); above it is its own finding */
	usualMaxDailyDoseMg: number | null;
	usualMaxDailyDoseMgPerKg: number | null;
	indications: IndicationRegimen[];
	/** regimens on renal replacement therapy; a missing mode has none (no proposal, with the reason) */
	renalReplacement: Partial<Record<RenalReplacementMode, RenalReplacementRegimen>>;
	/** renal reduction applies from this day of therapy (teicoplanin: loading days first); null = from day 1 */
	renalAdjustmentFromDay: number | null;
	/**
	 * Extended or continuous infusion: an order infused over at least minInfusionH is compared by its
	 * daily dose against minDailyFraction × the reference daily dose (same exposure with less drug).
	 */
	extendedInfusion: { minInfusionH: number; minDailyFraction: number } | null;
	/**
	 * Combination products dosed by one component (co-trimoxazole by trimethoprim): the order's dose is
	 * in `component` mg; a dose ordered as the combined product is divided by combinedPerComponent.
	 */
	combination: { component: string; combinedPerComponent: number } | null;
};

export type OrderInput = {
	doseMg: number;
	intervalH: number;
	infusionH: number;
	route: Route;
	startAt: Date;
	/** first administration; defaults to startAt */
	firstDoseAt?: Date | null;
	/** a documented restart of therapy (after a pause), which may justify a new loading dose */
	restartAt?: Date | null;
};

export type AssessSettings = {
	obeseRatio?: number; // default 1.2
	crclNormalMlMin?: number; // default 100
	bsaFormula?: 'mosteller' | 'dubois'; // default mosteller
	scrFloorMgDl?: number | null; // default off (null)
	maxAlbuminAgeH?: number; // default 168 (7 days); older albumin counts as missing
	bandTolerance?: number; // default 0.2: order daily dose within ±20 % (log-symmetric) of the band's is "within"
	/** MaxΔPCr/day for kinetic GFR; default null = computed from creatinine production and 0.6 L/kg body water */
	kineticGfrMaxRiseMgDlPerDay?: number | null;
	/** vancomycin AUC24 window for the fit from measured levels, mg·h/L (a rule parameter); default the agent's target */
	aucWindowMgHL?: [number, number];
};

export type AssessInput = {
	at: Date;
	patient: {
		birthDate?: Date;
		ageYears?: number;
		sex: Sex;
		heights: { at: Date; cm: number }[];
		weights: { at: Date; kg: number }[];
		/** periods on dialysis or CRRT (from the feed, or set by a pharmacist) */
		renalReplacement?: RenalReplacementEpisode[];
	};
	creatinine: { at: Date; creatinine: Creatinine }[];
	albumin: { at: Date; gL: number }[];
	agent: AgentParams;
	order: OrderInput;
	settings?: AssessSettings;
	/**
	 * Measured levels (agents dosed from levels only): the order's doses actually given and its agent's levels
	 * drawn while it ran. Absent = not loaded (no `measured` section); [] = none on record.
	 */
	administrations?: Administration[];
	levels?: DrugLevel[];
	/** the order's schedule for doses with no recorded administration; default from the order */
	schedule?: DosingSchedule;
};

export type TraceInput = { name: string; value: number | string | boolean | null; unit: string; source?: string };

/** One step of the calculation trace a pharmacist can follow. */
export type TraceStep = {
	key: string; // machine key, e.g. "crcl"
	quantity: string; // readable, e.g. "Creatinine clearance (Cockcroft–Gault)"
	value: number | string | boolean | null;
	unit: string;
	formula: string; // formula name and expression
	inputs: TraceInput[];
	source: string; // published source, or "common practice"
	note?: string;
};

export type KineticsSnapshot = {
	clearanceLPerH: number;
	volumeL: number;
	kPerH: number;
	halfLifeH: number;
};

export type ProposedRegimen = {
	doseMg: number;
	intervalH: number;
	infusionH: number;
	/** a loading dose to consider (new order or documented restart only), mg */
	loadingDoseMg: number | null;
	basis: string; // e.g. "renal band CrCl 20–39 mL/min" or "AUC24 target 400–600 mg·h/L"
	/** given after each intermittent dialysis session (intervalH then reads as "about every 48 h") */
	afterEachSession?: boolean;
	/** the proposal's own predicted steady state (null when kinetics are not modelled for it) */
	predicted?: { peakMgL: number | null; troughMgL: number | null; auc24MgHL: number | null } | null;
};

/** Where the order stands in its course (see timeline.therapyDay). */
export type TherapyContext = {
	route: Route;
	/** false for a route the agent is not absorbed by (oral vancomycin): no systemic assessment */
	systemic: boolean;
	bioavailability: number;
	dayOfTherapy: number;
	dosesGiven: number;
	/** before the second dose: a loading dose may still belong */
	newOrder: boolean;
	restarted: boolean;
	extendedInfusion: boolean;
};

/** One level as the assessment keeps it (JSON: dates come back as ISO strings from the store). */
export type MeasuredLevelSummary = {
	at: Date;
	mgL: number;
	timing: LevelTiming;
	/** predicted at that time by the individual fit (vancomycin), mg/L */
	predictedMgL?: number | null;
	/** predicted by the population prior of the fit (vancomycin), mg/L */
	predictedPriorMgL?: number | null;
	residualMgL?: number | null;
	/** why the level was not used (impossible time, or not needed by the method) */
	reason?: string;
	note?: string;
};

/**
 * What the measured levels say about the order (agents dosed from levels, when the levels were loaded):
 * the patient's own kinetics, exposure and a regimen from them, or the reason there is none.
 */
export type MeasuredAssessment = {
	method: 'vancomycin-map' | 'aminoglycoside-two-level' | 'aminoglycoside-single-level' | 'none';
	/** levels of the agent drawn while the order ran, up to the assessment */
	levelCount: number;
	/** when the newest of them was drawn (a new level is a new result for the flags), or null */
	latestLevelAt: Date | null;
	/** recorded administrations of the order, up to the assessment */
	administrationCount: number;
	/** scheduled doses without an administration, assumed given as ordered (null when no fit ran) */
	assumedDoseCount: number | null;
	/** individual CL, V, k and t½ (null when the levels allow no estimate) */
	individual: KineticsSnapshot | null;
	/** the population prior of the fit (vancomycin) */
	prior: KineticsSnapshot | null;
	/** AUC24 at steady state of the current regimen with the individual clearance (vancomycin), mg·h/L */
	auc24MgHL: number | null;
	/** AUC over the 24 h before the assessment from the doses in the history (vancomycin), mg·h/L */
	auc24LastDayMgHL: number | null;
	aucWindowMgHL: [number, number] | null;
	/** extrapolated true peak (end of infusion) and trough (before the next dose) of the dose the levels follow (aminoglycoside), mg/L */
	truePeakMgL: number | null;
	trueTroughMgL: number | null;
	/** how far the levels moved the estimate from the prior (vancomycin) */
	statement: string | null;
	/** why there is no individual estimate, or null */
	reason: string | null;
	/** regimen from the individual kinetics, or null with proposalReason */
	proposed: ProposedRegimen | null;
	proposalReason: string | null;
	fitted: MeasuredLevelSummary[];
	excluded: MeasuredLevelSummary[];
	/**
	 * the latest level labelled trough drawn at a possible time (after a dose, not during an infusion), with the
	 * concentration the assessment's population kinetics predict then from the doses in the history
	 */
	latestTrough: { at: Date; mgL: number; populationMgL: number | null } | null;
};

export type Assessment = {
	at: Date;
	complete: boolean;
	/** names of missing or stale inputs, e.g. "height", "albumin", "creatinine older than 72 h" */
	missing: string[];
	covariates: {
		ageYears: number;
		heightCm: number | null;
		weightKg: number | null;
		idealBodyWeightKg: number | null;
		adjustedBodyWeightKg: number | null;
		dosingWeightKg: number | null;
		weightBasis: WeightBasis | null;
		bsaM2: number | null;
	};
	creatinine: {
		latestMgDl: number | null;
		latestAt: Date | null;
		ageH: number | null;
		baselineMgDl: number | null;
		riseWithin48hMgDl: number | null;
		fallWithin48hMgDl?: number | null;
		stable: boolean;
	};
	renal: {
		crclMlMin: number | null;
		crclAtStartMlMin: number | null;
		egfrIndexed: number | null; // mL/min/1.73 m²
		egfrMlMin: number | null; // de-indexed
		kineticGfrMlMin: number | null;
		kdigoStage: 0 | 1 | 2 | 3;
		arc: boolean;
		/** the CrCl bands, kinetics and proposal use (see renal-state.ts DosingBasis) */
		dosingCrclMlMin?: number | null;
		dosingBasis?: string;
		renalReplacement?: RenalReplacementMode | null;
	};
	albumin: {
		latestGL: number | null;
		latestAt: Date | null;
		unboundFraction: number | null;
		unboundFractionRef: number;
	};
	kinetics: {
		now: KineticsSnapshot | null;
		atStart: KineticsSnapshot | null;
		halfLifeRatio: number | null; // now / at start
		/** the same ratio at the reference albumin: the change that renal function alone explains */
		halfLifeRatioRenal?: number | null;
		peakMgL: number | null; // predicted steady-state peak of the current regimen
		troughMgL: number | null;
		auc24MgHL: number | null;
	};
	therapy?: TherapyContext;
	dosing: {
		dailyDoseMg: number;
		band: DoseBand | null;
		/** daily dose of the regimen the order is held against (band, indication or dialysis regimen) */
		bandDailyDoseMg: number | null;
		comparedToBand: 'above' | 'within' | 'below' | 'unknown';
		/** label of that regimen, e.g. "CrCl 20–39 mL/min" or "intermittent haemodialysis" */
		referenceLabel?: string | null;
		/** the regimen is the agent's full one: nothing is reduced for renal reasons here */
		referenceUnadjusted?: boolean;
		/** why no regimen of the library applies today (route, renal function, dialysis), or null */
		noRegimenReason?: string | null;
		usualMaxDailyDoseMg?: number | null;
		proposed: ProposedRegimen | null;
		/** why nothing is proposed, when proposed is null */
		proposalReason?: string | null;
		/** cautions that fit this patient, shown beside the proposal and in the e-mail */
		cautions?: string[];
		/** the proposal comes from the individual kinetics of measured levels */
		fromLevels?: boolean;
	};
	/** measured levels (agents dosed from levels, when the assessment was given them) */
	measured?: MeasuredAssessment;
	trace: TraceStep[];
};
