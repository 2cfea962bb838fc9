// Types shared by the clinical core, the rules, the worker and the pages.
// Numbers carry their unit in their name (conventions.md §10).

export type Sex = 'female' | 'male';

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
};

export type PopulationModel = 'generic' | 'vancomycin' | 'aminoglycoside';

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
	/** how to propose a regimen when no band applies: keep interval and cut dose, or keep dose and extend interval */
	adjustBy: 'dose' | 'interval';
	troughMaxMgL: number | null;
	aucTargetMgHL: [number, number] | null;
	loadingTargetMgL: number | null;
	nephrotoxic: boolean;
	/** creatinine older than this makes the renal estimate stale */
	maxCreatinineAgeH: number;
	bioavailability: number;
};

export type OrderInput = {
	doseMg: number;
	intervalH: number;
	infusionH: number;
	route: 'iv' | 'po' | 'im';
	startAt: Date;
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
};

export type AssessInput = {
	at: Date;
	patient: {
		birthDate?: Date;
		ageYears?: number;
		sex: Sex;
		heights: { at: Date; cm: number }[];
		weights: { at: Date; kg: number }[];
	};
	creatinine: { at: Date; creatinine: Creatinine }[];
	albumin: { at: Date; gL: number }[];
	agent: AgentParams;
	order: OrderInput;
	settings?: AssessSettings;
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
	loadingDoseMg: number | null;
	basis: string; // e.g. "renal band 20–39 mL/min" or "Giusti–Hayton Q = 0.37, interval kept"
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
		peakMgL: number | null; // predicted steady-state peak of the current regimen
		troughMgL: number | null;
		auc24MgHL: number | null;
	};
	dosing: {
		dailyDoseMg: number;
		band: DoseBand | null;
		bandDailyDoseMg: number | null;
		comparedToBand: 'above' | 'within' | 'below' | 'unknown';
		proposed: ProposedRegimen | null;
	};
	trace: TraceStep[];
};
