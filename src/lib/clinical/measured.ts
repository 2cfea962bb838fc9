// assess() stage: what the measured levels say about an order whose agent is dosed from levels (vancomycin,
// aminoglycosides) — the fit of clinical/levels.ts on the doses actually given, summarised for the stored
// assessment, its steps added to the trace, and the latest trough beside the population prediction for it.
import { buildDosingHistory, concentrationAtMs, infusionRunningAt } from './dosing-history';
import { ClinicalInputError } from './errors';
import { fitMeasuredLevels, usesMeasuredLevels, type MeasuredLevelsResult } from './levels';
import type { Administration, DosingHistory, DosingSchedule, DrugLevel, ExcludedLevel } from './levels-types';
import { input, SOURCES, step } from './trace';
import type { AgentParams, AssessInput, KineticsSnapshot, MeasuredAssessment, MeasuredLevelSummary, RenalReplacementMode, TraceStep } from './types';

export type MeasuredStageInput = {
	input: AssessInput;
	agent: AgentParams;
	at: Date;
	order: { doseMg: number; intervalH: number; infusionH: number };
	/** Cockcroft–Gault CrCl now, mL/min (the vancomycin prior's covariate) */
	crclMlMin: number | null;
	/** total body weight now, kg */
	totalWeightKg: number | null;
	/** the agent's Vd-basis weight, kg */
	vdWeightKg: number | null;
	renalReplacement: RenalReplacementMode | null;
	/** the assessment's population kinetics now (for the trough's population prediction) */
	population: KineticsSnapshot | null;
	aucWindowMgHL?: [number, number];
};

export type MeasuredStage = { measured: MeasuredAssessment; trace: TraceStep[] };

const LEVELS_SOURCE = 'common practice (levels of the agent drawn while the order ran)';

const summary = (level: DrugLevel): MeasuredLevelSummary => ({ at: level.at, mgL: level.mgL, timing: level.timing });
const excludedSummary = (e: ExcludedLevel): MeasuredLevelSummary => ({ ...summary(e.level), reason: e.reason });

/** The order's schedule: from its first dose, every interval, as ordered. */
export function scheduleOf(order: AssessInput['order']): DosingSchedule {
	return { startAt: order.firstDoseAt ?? order.startAt, intervalH: order.intervalH, doseMg: order.doseMg, infusionH: order.infusionH };
}

/** The latest level labelled trough that could be one: drawn after a dose, not during an infusion. */
function latestTrough(
	levels: readonly DrugLevel[],
	history: DosingHistory,
	atMs: number,
	population: KineticsSnapshot | null
): MeasuredAssessment['latestTrough'] {
	const first = history.doses.length > 0 ? history.doses[0].startMs : Infinity;
	let best: DrugLevel | null = null;
	for (const l of levels) {
		const t = l.at.getTime();
		if (l.timing !== 'trough' || !(l.mgL > 0) || t > atMs || t <= first || infusionRunningAt(history.doses, t) !== null) continue;
		if (best === null || t > best.at.getTime()) best = l;
	}
	if (best === null) return null;
	const populationMgL = population === null ? null : concentrationAtMs(history.doses, population.kPerH, population.volumeL, best.at.getTime());
	return { at: best.at, mgL: best.mgL, populationMgL };
}

function fromResult(result: MeasuredLevelsResult, base: MeasuredAssessment): MeasuredAssessment {
	if (result.kind === 'vancomycin') {
		const fit = result.fit;
		const fitted = fit.fitted.length > 0;
		return {
			...base,
			method: 'vancomycin-map',
			assumedDoseCount: fit.history.assumedCount,
			individual: fitted ? fit.individual : null,
			prior: fit.prior,
			auc24MgHL: fitted ? fit.auc24CurrentMgHL : null,
			auc24LastDayMgHL: fitted ? fit.auc24LastDayMgHL : null,
			aucWindowMgHL: fit.aucWindowMgHL,
			statement: fit.statement,
			reason: fitted ? null : fit.statement,
			proposed: fitted ? fit.proposal.proposed : null,
			proposalReason: fitted ? fit.proposal.reason : null,
			fitted: fit.fitted.map((f) => ({
				...summary(f.level),
				predictedMgL: f.predictedMgL,
				predictedPriorMgL: f.predictedPriorMgL,
				residualMgL: f.residualMgL,
				...(f.note ? { note: f.note } : {})
			})),
			excluded: fit.excluded.map(excludedSummary)
		};
	}
	if (result.kind === 'aminoglycoside') {
		const r = result.result;
		return {
			...base,
			method: r.method === 'single-level' ? 'aminoglycoside-single-level' : 'aminoglycoside-two-level',
			assumedDoseCount: r.history.assumedCount,
			individual: r.kinetics,
			truePeakMgL: r.truePeakMgL,
			trueTroughMgL: r.trueTroughMgL,
			reason: r.reason,
			proposed: r.kinetics === null ? null : r.proposal.proposed,
			proposalReason: r.kinetics === null ? null : r.proposal.reason,
			fitted: r.used.map(summary),
			excluded: r.excluded.map(excludedSummary)
		};
	}
	return { ...base, reason: result.reason };
}

/**
 * The measured-level section of an assessment, or null when the agent is not dosed from levels or the caller
 * gave no levels and no administrations (not loaded). Bad level data does not stop the assessment: the
 * section says why no estimate was made.
 */
export function measuredStage(args: MeasuredStageInput): MeasuredStage | null {
	const { input: inputArg, agent, at } = args;
	if (!usesMeasuredLevels(agent)) return null;
	if (inputArg.levels === undefined && inputArg.administrations === undefined) return null;
	const atMs = at.getTime();
	const levels: DrugLevel[] = inputArg.levels ?? [];
	const administrations: Administration[] = inputArg.administrations ?? [];
	const drawn = levels.filter((l) => l.at instanceof Date && l.at.getTime() <= atMs);
	const levelCount = drawn.length;
	const latestLevelMs = drawn.reduce((m, l) => Math.max(m, l.at.getTime()), -Infinity);
	const administrationCount = administrations.filter((a) => a.startAt instanceof Date && a.startAt.getTime() <= atMs).length;
	const schedule = inputArg.schedule ?? scheduleOf(inputArg.order);
	let measured: MeasuredAssessment = {
		method: 'none',
		levelCount,
		latestLevelAt: levelCount > 0 ? new Date(latestLevelMs) : null,
		administrationCount,
		assumedDoseCount: null,
		individual: null,
		prior: null,
		auc24MgHL: null,
		auc24LastDayMgHL: null,
		aucWindowMgHL: null,
		truePeakMgL: null,
		trueTroughMgL: null,
		statement: null,
		reason: null,
		proposed: null,
		proposalReason: null,
		fitted: [],
		excluded: [],
		latestTrough: null
	};
	const trace: TraceStep[] = [];
	let history: DosingHistory | null = null;

	if (inputArg.order.route !== 'iv') measured.reason = 'levels are interpreted for intravenous orders only';
	else if (levelCount === 0) measured.reason = 'no level measured';
	else if (agent.model === 'vancomycin' && args.renalReplacement !== null)
		measured.reason = 'on renal replacement therapy the population prior (from Cockcroft–Gault CrCl) does not apply: no Bayesian estimate';
	else {
		try {
			const result = fitMeasuredLevels({
				at,
				agent,
				administrations,
				levels,
				schedule,
				covariates:
					args.crclMlMin !== null && args.crclMlMin > 0 && args.totalWeightKg !== null ? { crclMlMin: args.crclMlMin, weightKg: args.totalWeightKg } : null,
				weightKg: args.vdWeightKg,
				...(args.aucWindowMgHL ? { aucWindowMgHL: args.aucWindowMgHL } : {})
			});
			measured = fromResult(result, measured);
			if (result.kind === 'vancomycin') {
				history = result.fit.history;
				trace.push(...result.fit.trace);
			} else if (result.kind === 'aminoglycoside') {
				history = result.result.history;
				trace.push(...result.result.trace);
			}
		} catch (error) {
			if (!(error instanceof ClinicalInputError)) throw error;
			measured.reason = `the levels or administrations could not be used: ${error.message}`;
		}
	}

	if (inputArg.order.route === 'iv' && levelCount > 0) {
		if (history === null) {
			try {
				history = buildDosingHistory({ at, administrations, schedule });
			} catch (error) {
				if (!(error instanceof ClinicalInputError)) throw error;
			}
		}
		if (history !== null) measured.latestTrough = latestTrough(levels, history, atMs, args.population);
	}

	const trough = measured.latestTrough;
	trace.unshift(
		step(
			'measuredLevels',
			'Measured levels of the agent during the order',
			levelCount,
			'levels',
			agent.model === 'vancomycin'
				? 'maximum a posteriori fit of CL and V to the levels, on the doses actually given'
				: 'Sawchuk–Zaske: two levels after the same dose (or one after an extended-interval dose, with the population volume), on the doses actually given',
			[
				input('administrations recorded', administrationCount, 'doses', SOURCES.record),
				input('levels recorded', levelCount, 'levels', SOURCES.record),
				input('individual clearance', measured.individual?.clearanceLPerH ?? null, 'L/h', 'the fit below')
			],
			LEVELS_SOURCE,
			measured.reason ?? undefined
		)
	);
	if (trough !== null) {
		trace.push(
			step(
				'measuredTrough',
				'Latest measured trough against the population prediction',
				trough.populationMgL === null || trough.populationMgL <= 0 ? null : trough.mgL / trough.populationMgL,
				'1',
				'measured / predicted at the same time by superposition of the doses in the history, with the population kinetics now',
				[
					input('measured trough', trough.mgL, 'mg/L', SOURCES.record),
					input('drawn at', trough.at.toISOString(), '', SOURCES.record),
					input('population prediction', trough.populationMgL, 'mg/L', 'step kNow'),
					input('trough limit', agent.troughMaxMgL, 'mg/L', SOURCES.agentLibrary)
				],
				SOURCES.oneCompartment,
				trough.populationMgL === null ? 'no population kinetics to compare with' : undefined
			)
		);
	}
	return { measured, trace };
}
