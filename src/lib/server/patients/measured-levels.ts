// The patient view's measured levels for one order: the doses given and the levels drawn (from the record),
// fitted on the fly by the clinical core (fitMeasuredLevels: pure and fast), and shaped for the page —
// individual CL, V and t½ beside the population prior, AUC24 now or the true peak and trough, the proposal or
// why there is none, each level with its residual or the reason it was not fitted, the chart's curves and
// the fit's trace.
import { concentrationAtMs } from '../../clinical/dosing-history';
import { ClinicalInputError } from '../../clinical/errors';
import { fitMeasuredLevels, usesMeasuredLevels, type MeasuredLevelsInput, type MeasuredLevelsResult } from '../../clinical/levels';
import type { DosingHistory, DrugLevel, LevelTiming } from '../../clinical/levels-types';
import type { AgentParams, Assessment, KineticsSnapshot, ProposedRegimen, TraceStep } from '../../clinical/types';
import { levelCurves, type LevelCurves } from '../../levels-chart';
import type { DbOrTx } from '../db';
import { measuredDosing } from '../levels';

const HOUR_MS = 3_600_000;

export type MeasuredLevelPoint = {
	id: string | null;
	at: string;
	/** hours from the first dose (null when no dose is known) */
	tH: number | null;
	mgL: number;
	timing: LevelTiming;
	fitted: boolean;
	/** why the fit left it out, or null */
	excludedReason: string | null;
	predictedMgL: number | null;
	predictedPriorMgL: number | null;
	/** measured − predicted (individual), mg/L */
	residualMgL: number | null;
	weightedResidual: number | null;
	note: string | null;
};

export type MeasuredLevelsView = {
	agentKind: 'vancomycin' | 'aminoglycoside';
	at: string;
	/** individual when the levels gave the patient's own kinetics; population otherwise */
	basis: 'individual' | 'population';
	/** why there is no individual estimate (no levels, none fittable, no covariates…), or null */
	noFitReason: string | null;
	prior: KineticsSnapshot | null;
	individual: KineticsSnapshot | null;
	/** vancomycin: AUC24 at steady state of the current regimen, and over the last 24 h, individual, mg·h/L */
	auc24NowMgHL: number | null;
	auc24LastDayMgHL: number | null;
	aucWindowMgHL: [number, number] | null;
	/** aminoglycosides: extrapolated true peak and trough, and the targets, mg/L */
	truePeakMgL: number | null;
	trueTroughMgL: number | null;
	targets: { peakMgL: number; troughMgL: number } | null;
	proposal: ProposedRegimen | null;
	proposalReason: string | null;
	/** how far the levels moved the estimate from the prior */
	statement: string | null;
	objective: { atPrior: number; atMap: number } | null;
	levels: MeasuredLevelPoint[];
	firstDoseAt: string | null;
	doses: { tH: number; durationH: number; doseMg: number; source: 'given' | 'scheduled' }[];
	historyNotes: string[];
	curves: LevelCurves | null;
	trace: TraceStep[];
};

export type LevelsOrder = {
	id: string;
	patientId: string;
	agentId: string;
	startAt: Date;
	stoppedAt: Date | null;
	doseMg: number;
	intervalH: number;
	infusionH: number;
};

type StoredAssessment = Pick<Assessment, 'covariates' | 'renal' | 'kinetics' | 'measured'>;

const iso = (d: Date) => d.toISOString();

function emptyView(kind: MeasuredLevelsView['agentKind'], at: Date, prior: KineticsSnapshot | null, reason: string): MeasuredLevelsView {
	return {
		agentKind: kind,
		at: iso(at),
		basis: 'population',
		noFitReason: reason,
		prior,
		individual: null,
		auc24NowMgHL: null,
		auc24LastDayMgHL: null,
		aucWindowMgHL: null,
		truePeakMgL: null,
		trueTroughMgL: null,
		targets: null,
		proposal: null,
		proposalReason: null,
		statement: null,
		objective: null,
		levels: [],
		firstDoseAt: null,
		doses: [],
		historyNotes: [],
		curves: null,
		trace: []
	};
}

function levelPoint(
	level: DrugLevel,
	history: DosingHistory,
	own: KineticsSnapshot | null,
	prior: KineticsSnapshot | null,
	fitted: boolean,
	reason: string | null
): MeasuredLevelPoint {
	const t0 = history.doses[0]?.startMs ?? null;
	const tMs = level.at.getTime();
	const predict = (k: KineticsSnapshot | null) => (k && t0 !== null && tMs > t0 ? concentrationAtMs(history.doses, k.kPerH, k.volumeL, tMs) : null);
	const predictedMgL = fitted ? predict(own) : null;
	return {
		id: level.id ?? null,
		at: iso(level.at),
		tH: t0 === null ? null : (tMs - t0) / HOUR_MS,
		mgL: level.mgL,
		timing: level.timing,
		fitted,
		excludedReason: reason,
		predictedMgL,
		predictedPriorMgL: predict(prior),
		residualMgL: predictedMgL === null ? null : level.mgL - predictedMgL,
		weightedResidual: null,
		note: null
	};
}

/**
 * The measured levels of one order now, or null when its agent is not dosed from levels. `latest` is the
 * order's latest assessment: its CrCl and weight are the population model's covariates, its kinetics the
 * population estimate of aminoglycosides.
 */
export async function measuredLevelsOf(
	order: LevelsOrder,
	agent: AgentParams,
	latest: StoredAssessment,
	db: DbOrTx,
	at: Date = new Date()
): Promise<MeasuredLevelsView | null> {
	if (!usesMeasuredLevels(agent)) return null;
	const kind: MeasuredLevelsView['agentKind'] = agent.model === 'vancomycin' ? 'vancomycin' : 'aminoglycoside';
	const population = latest.kinetics.now;
	const { administrations, levels } = await measuredDosing(order, at, db);
	if (levels.length === 0) return emptyView(kind, at, population, 'no level has been measured for this order');
	// the same conditions the assessment fits under (clinical/measured.ts), so the page and the board agree
	if (kind === 'vancomycin' && latest.renal.renalReplacement)
		return emptyView(
			kind,
			at,
			population,
			'on renal replacement therapy the population prior (from Cockcroft–Gault CrCl) does not apply: no Bayesian estimate'
		);
	const crcl = latest.renal.crclMlMin;
	const weight = latest.covariates.weightKg;
	const input: MeasuredLevelsInput = {
		at,
		agent,
		administrations,
		levels,
		schedule: { startAt: order.startAt, intervalH: order.intervalH, doseMg: order.doseMg, infusionH: order.infusionH, stopAt: order.stoppedAt },
		covariates: crcl !== null && crcl > 0 && weight !== null && weight > 0 ? { crclMlMin: crcl, weightKg: weight } : null,
		weightKg: latest.covariates.dosingWeightKg,
		// the AUC window the assessment used: the active rule set's, kept with it
		...(latest.measured?.aucWindowMgHL ? { aucWindowMgHL: latest.measured.aucWindowMgHL } : {})
	};
	let result: MeasuredLevelsResult;
	try {
		result = fitMeasuredLevels(input);
	} catch (e) {
		// stored values the core refuses (say an infusion longer than the interval): the page says so, the rest still shows
		if (!(e instanceof ClinicalInputError)) throw e;
		result = { kind: 'none', reason: `the stored doses or levels cannot be fitted: ${e.message}` };
	}
	if (result.kind === 'none') {
		const view = emptyView(kind, at, population, result.reason);
		view.levels = levels.map((l) => ({
			...levelPoint(l, { doses: [], givenCount: 0, assumedCount: 0, notGivenCount: 0, notes: [], trace: [] }, null, null, false, null)
		}));
		return view;
	}
	const history = result.kind === 'vancomycin' ? result.fit.history : result.result.history;
	const t0 = history.doses[0]?.startMs ?? null;
	const base = {
		agentKind: kind,
		at: iso(at),
		firstDoseAt: t0 === null ? null : iso(new Date(t0)),
		doses: t0 === null ? [] : history.doses.map((d) => ({ tH: (d.startMs - t0) / HOUR_MS, durationH: d.durationH, doseMg: d.doseMg, source: d.source })),
		historyNotes: history.notes
	};
	let view: MeasuredLevelsView;
	if (result.kind === 'vancomycin') {
		const fit = result.fit;
		const own = fit.fitted.length > 0;
		const byLevel = new Map(fit.fitted.map((f) => [f.level, f]));
		const reasons = new Map(fit.excluded.map((e) => [e.level, e.reason]));
		view = {
			...base,
			basis: own ? 'individual' : 'population',
			noFitReason: own ? null : fit.statement,
			prior: fit.prior,
			individual: own ? fit.individual : null,
			auc24NowMgHL: own ? fit.auc24CurrentMgHL : null,
			auc24LastDayMgHL: own ? fit.auc24LastDayMgHL : null,
			aucWindowMgHL: fit.aucWindowMgHL,
			truePeakMgL: null,
			trueTroughMgL: null,
			targets: null,
			proposal: own ? fit.proposal.proposed : null,
			proposalReason: own ? fit.proposal.reason : null,
			statement: fit.statement,
			objective: { atPrior: fit.objective.atPrior, atMap: fit.objective.atMap },
			levels: [...fit.fitted.map((f) => f.level), ...fit.excluded.map((e) => e.level)]
				.sort((a, b) => a.at.getTime() - b.at.getTime())
				.map((level) => {
					const f = byLevel.get(level);
					const point = levelPoint(level, history, fit.individual, fit.prior, f !== undefined, reasons.get(level) ?? null);
					if (!f) return point;
					return {
						...point,
						tH: f.tH,
						predictedMgL: f.predictedMgL,
						predictedPriorMgL: f.predictedPriorMgL,
						residualMgL: f.residualMgL,
						weightedResidual: f.weightedResidual,
						note: f.note ?? null
					};
				}),
			curves: null,
			trace: fit.trace
		};
	} else {
		const r = result.result;
		const own = r.kinetics !== null;
		const used = new Set(r.used);
		const reasons = new Map(r.excluded.map((e) => [e.level, e.reason]));
		view = {
			...base,
			basis: own ? 'individual' : 'population',
			noFitReason: r.reason,
			prior: population,
			individual: r.kinetics,
			auc24NowMgHL: null,
			auc24LastDayMgHL: null,
			aucWindowMgHL: null,
			truePeakMgL: r.truePeakMgL,
			trueTroughMgL: r.trueTroughMgL,
			targets: r.targets,
			proposal: own ? r.proposal.proposed : null,
			proposalReason: own ? r.proposal.reason : null,
			statement:
				r.method === 'single-level'
					? `One level after an extended-interval dose: the volume is the population's (${r.kinetics!.volumeL.toFixed(1)} L), the elimination rate the patient's. Less certain than two levels after the same dose.`
					: null,
			objective: null,
			levels: [...levels]
				.sort((a, b) => a.at.getTime() - b.at.getTime())
				.map((l) =>
					levelPoint(
						l,
						history,
						r.kinetics,
						population,
						used.has(l),
						reasons.get(l) ??
							(used.has(l)
								? null
								: r.method === 'single-level'
									? 'not the level the one-level reading uses'
									: 'not one of the levels the two-level method uses')
					)
				),
			curves: null,
			trace: r.trace
		};
	}
	view.curves = levelCurves({
		doses: history.doses,
		atMs: at.getTime(),
		individual: view.individual,
		population: view.prior,
		proposal: view.proposal,
		currentIntervalH: order.intervalH,
		levelTimesH: view.levels.flatMap((l) => (l.tH === null ? [] : [l.tH]))
	});
	return view;
}
