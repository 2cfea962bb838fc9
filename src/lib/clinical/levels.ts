// One entry to the measured-level kinetics: given an order's doses actually given and the levels drawn,
// the individual estimate for its agent (vancomycin: MAP fit against a population prior; aminoglycosides:
// two levels after one dose), or the reason there is none. The assessment, the projection panel and the
// rules all ask this, so the patient view and the board can never disagree about a fit.
import { aminoglycosideTwoLevels } from './levels-aminoglycoside';
import type { Administration, AminoglycosideLevels, AminoglycosideTargets, DosingSchedule, DrugLevel, LevelCovariates, VancomycinFit } from './levels-types';
import { fitVancomycinLevels } from './levels-vancomycin';
import type { AgentParams } from './types';

export type MeasuredLevelsInput = {
	at: Date;
	agent: AgentParams;
	administrations: readonly Administration[];
	levels: readonly DrugLevel[];
	schedule: DosingSchedule;
	/** Cockcroft–Gault CrCl (mL/min) and total body weight (kg) at `at`; null when either is unknown */
	covariates: LevelCovariates | null;
	/** the agent's Vd-basis weight, kg (aminoglycoside volume per kg and maximum daily dose) */
	weightKg: number | null;
	/** vancomycin AUC24 window, mg·h/L (rule parameter); default the agent's target */
	aucWindowMgHL?: [number, number];
	/** aminoglycoside peak/trough targets; default the agent's */
	aminoglycosideTargets?: Partial<AminoglycosideTargets>;
};

export type MeasuredLevelsResult =
	| { kind: 'vancomycin'; fit: VancomycinFit }
	| { kind: 'aminoglycoside'; result: AminoglycosideLevels }
	/** the agent's kinetics are not estimated from levels, or nothing can be estimated; reason says why */
	| { kind: 'none'; reason: string };

/** Agents whose doses Ebbline estimates from measured levels. */
export function usesMeasuredLevels(agent: Pick<AgentParams, 'model'>): boolean {
	return agent.model === 'vancomycin' || agent.model === 'aminoglycoside';
}

export function fitMeasuredLevels(input: MeasuredLevelsInput): MeasuredLevelsResult {
	const { agent } = input;
	if (agent.model === 'vancomycin') {
		if (!input.covariates) return { kind: 'none', reason: 'no creatinine clearance or body weight at this time: the population prior cannot be set' };
		return {
			kind: 'vancomycin',
			fit: fitVancomycinLevels({
				at: input.at,
				agent,
				administrations: [...input.administrations],
				levels: [...input.levels],
				schedule: input.schedule,
				covariates: input.covariates,
				aucWindowMgHL: input.aucWindowMgHL
			})
		};
	}
	if (agent.model === 'aminoglycoside') {
		return {
			kind: 'aminoglycoside',
			result: aminoglycosideTwoLevels({
				at: input.at,
				agent,
				administrations: [...input.administrations],
				levels: [...input.levels],
				schedule: input.schedule,
				weightKg: input.weightKg,
				targets: input.aminoglycosideTargets
			})
		};
	}
	return { kind: 'none', reason: `${agent.name} is not dosed from measured levels` };
}
