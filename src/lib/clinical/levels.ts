// One entry to the measured-level kinetics: given an order's doses actually given and the levels drawn,
// the individual estimate for its agent (vancomycin: MAP fit against a population prior; aminoglycosides:
// two levels after one dose), or the reason there is none. The assessment, the projection panel and the
// rules all ask this, so the patient view and the board can never disagree about a fit.
import { concentrationAtMs } from './dosing-history';
import { aminoglycosideTwoLevels } from './levels-aminoglycoside';
import type {
	Administration,
	AminoglycosideLevels,
	AminoglycosideTargets,
	DosingHistory,
	DosingSchedule,
	DrugLevel,
	LevelCovariates,
	LevelProposal,
	VancomycinFit
} from './levels-types';
import { fitVancomycinLevels } from './levels-vancomycin';
import { input, step } from './trace';
import type { AgentParams, KineticsSnapshot, TraceStep } from './types';

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

/**
 * A vancomycin trough above this, mg/L, is associated with nephrotoxicity (Rybak MJ et al., Am J Health-Syst
 * Pharm 2020;77:835–864, from memory): no new regimen starts while the patient's own kinetics put the next
 * dose's trough above it. Aminoglycosides use the agent's trough limit.
 */
export const VANCOMYCIN_TROUGH_CEILING_MG_L = 20;

/** The ceiling the concentration must be under before a regimen from levels may start, mg/L, or null (none known). */
export function startCeilingMgL(agent: AgentParams, targets?: Partial<AminoglycosideTargets>): number | null {
	if (agent.model === 'vancomycin') return VANCOMYCIN_TROUGH_CEILING_MG_L;
	return targets?.troughMgL ?? agent.troughMaxMgL ?? null;
}

/** The order's next dose after `at` by its schedule (ms), or null when the order stops first. */
function nextDoseMs(schedule: DosingSchedule, atMs: number): number | null {
	const startMs = schedule.startAt.getTime();
	const intervalMs = schedule.intervalH * 3_600_000;
	const n = atMs <= startMs ? 0 : Math.ceil((atMs - startMs) / intervalMs);
	const next = startMs + n * intervalMs;
	if (schedule.stopAt && next >= schedule.stopAt.getTime()) return null;
	return next;
}

/**
 * Safety invariant on every proposal from levels: a regimen is proposed only when the patient's own kinetics
 * put the concentration at the next scheduled dose at or under the agent's ceiling. Above it the drug already
 * on board comes first: the proposal is withheld with the predicted value and what to do instead.
 */
export function holdWhileAboveCeiling(
	proposal: LevelProposal,
	args: {
		agent: AgentParams;
		history: DosingHistory;
		own: KineticsSnapshot | null;
		schedule: DosingSchedule;
		at: Date;
		targets?: Partial<AminoglycosideTargets>;
	}
): LevelProposal {
	if (proposal.proposed === null || args.own === null) return proposal;
	const ceiling = startCeilingMgL(args.agent, args.targets);
	const atMs = args.at.getTime();
	const nextMs = nextDoseMs(args.schedule, atMs) ?? atMs;
	if (ceiling === null) return proposal;
	const atNextMgL = concentrationAtMs(args.history.doses, args.own.kPerH, args.own.volumeL, Math.max(nextMs, atMs));
	if (!(atNextMgL > ceiling)) return proposal;
	return {
		proposed: null,
		reason: `withheld: the patient's own kinetics put the concentration at the next dose at ${atNextMgL.toFixed(1)} mg/L, above ${ceiling} mg/L; hold doses and re-check a level: a regimen from the levels follows once it has fallen under ${ceiling} mg/L`
	};
}

/** The trace step of a withheld proposal, after the fit's own proposal step. */
function holdStep(before: LevelProposal, after: LevelProposal, agent: AgentParams, targets?: Partial<AminoglycosideTargets>): TraceStep[] {
	if (before.proposed === null || after.proposed !== null) return [];
	const ceiling = startCeilingMgL(agent, targets);
	return [
		step(
			'levelHold',
			'Proposal withheld: drug on board',
			null,
			'',
			'no regimen while C(next dose) from the own kinetics > ceiling',
			[input('ceiling', ceiling, 'mg/L', agent.model === 'vancomycin' ? 'Rybak 2020 (from memory)' : 'agent library trough limit')],
			agent.model === 'vancomycin' ? 'Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864' : 'agent library',
			after.reason ?? undefined
		)
	];
}

export function fitMeasuredLevels(input: MeasuredLevelsInput): MeasuredLevelsResult {
	const { agent } = input;
	if (agent.model === 'vancomycin') {
		if (!input.covariates) return { kind: 'none', reason: 'no creatinine clearance or body weight at this time: the population prior cannot be set' };
		const fit = fitVancomycinLevels({
			at: input.at,
			agent,
			administrations: [...input.administrations],
			levels: [...input.levels],
			schedule: input.schedule,
			covariates: input.covariates,
			aucWindowMgHL: input.aucWindowMgHL
		});
		const own = fit.fitted.length > 0 ? fit.individual : null;
		return {
			kind: 'vancomycin',
			fit: { ...fit, proposal: holdWhileAboveCeiling(fit.proposal, { agent, history: fit.history, own, schedule: input.schedule, at: input.at }) }
		};
	}
	if (agent.model === 'aminoglycoside') {
		const result = aminoglycosideTwoLevels({
			at: input.at,
			agent,
			administrations: [...input.administrations],
			levels: [...input.levels],
			schedule: input.schedule,
			weightKg: input.weightKg,
			targets: input.aminoglycosideTargets
		});
		const proposal = holdWhileAboveCeiling(result.proposal, {
			agent,
			history: result.history,
			own: result.kinetics,
			schedule: input.schedule,
			at: input.at,
			targets: input.aminoglycosideTargets
		});
		return {
			kind: 'aminoglycoside',
			result: { ...result, proposal, trace: [...result.trace, ...holdStep(result.proposal, proposal, agent, input.aminoglycosideTargets)] }
		};
	}
	return { kind: 'none', reason: `${agent.name} is not dosed from measured levels` };
}
