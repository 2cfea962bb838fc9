// Concentration–time projection of an order's regimen against another one, and the target window an
// agent's parameters define. Pure (runs in the server and the browser); relative imports only.
import { auc24, concentrationCurve, steadyStateInfusion } from './clinical/kinetics';
import { SOURCES } from './clinical/trace';
import type { AgentParams, KineticsSnapshot } from './clinical/types';

export type RegimenInput = { doseMg: number; intervalH: number; infusionH: number };

export type ProjectionSeries = {
	key: 'start' | 'current' | 'proposed';
	label: string;
	regimen: RegimenInput;
	kinetics: { kPerH: number; volumeL: number; clearanceLPerH: number; halfLifeH: number };
	points: { tH: number; mgL: number }[];
	/** steady-state peak (end of infusion) and trough (pre-dose) */
	peakMgL: number;
	troughMgL: number;
	auc24MgHL: number;
};

export type TargetWindow = {
	/** shaded band, mg/L; null when the agent library gives no concentration band */
	band: { lowMgL: number; highMgL: number; label: string; source: string } | null;
	troughMaxMgL: number | null;
	peakTargetMgL: number | null;
	source: string;
};

export const PROJECTION_HOURS = 72;
export const PROJECTION_STEP_H = 0.25;

/**
 * The concentration target an agent's parameters define. With an AUC24 target the band is the
 * matching average steady-state concentration, Css,avg = AUC24 / 24 h (one-compartment identity,
 * clinical-reference F10); otherwise, with a trough ceiling and a peak target (aminoglycosides), the
 * band runs between them. Agent parameters are example data to be reviewed by the institution.
 */
export function targetWindow(agent: Pick<AgentParams, 'aucTargetMgHL' | 'troughMaxMgL' | 'loadingTargetMgL' | 'peakTargetMgL'>): TargetWindow | null {
	const troughMaxMgL = agent.troughMaxMgL ?? null;
	// a loading target is not a peak target (vancomycin is AUC-guided): only an explicit peak target is drawn
	const peakTargetMgL = agent.peakTargetMgL ?? null;
	let band: TargetWindow['band'] = null;
	if (agent.aucTargetMgHL) {
		const [lo, hi] = agent.aucTargetMgHL;
		band = {
			lowMgL: lo / 24,
			highMgL: hi / 24,
			label: `average concentration for AUC24 ${lo}–${hi} mg·h/L (Css,avg = AUC24 / 24 h)`,
			source: `${SOURCES.aucTarget}; ${SOURCES.oneCompartment}`
		};
	} else if (troughMaxMgL !== null && peakTargetMgL !== null && peakTargetMgL > troughMaxMgL) {
		band = {
			lowMgL: troughMaxMgL,
			highMgL: peakTargetMgL,
			label: `between the trough ceiling (${troughMaxMgL} mg/L) and the peak target (${peakTargetMgL} mg/L)`,
			source: SOURCES.agentLibrary
		};
	}
	if (band === null && troughMaxMgL === null && peakTargetMgL === null) return null;
	return { band, troughMaxMgL, peakTargetMgL, source: SOURCES.agentLibrary };
}

/** One regimen's curve over `hours` from the first dose, with its steady-state peak, trough and AUC24. */
export function projectSeries(
	key: ProjectionSeries['key'],
	label: string,
	regimen: RegimenInput,
	kinetics: KineticsSnapshot,
	hours = PROJECTION_HOURS,
	stepH = PROJECTION_STEP_H
): ProjectionSeries {
	const points = concentrationCurve({ regimen, kPerH: kinetics.kPerH, volumeL: kinetics.volumeL, fromH: 0, toH: hours, stepH });
	const ss = steadyStateInfusion({
		doseMg: regimen.doseMg,
		infusionH: regimen.infusionH,
		tauH: regimen.intervalH,
		volumeL: kinetics.volumeL,
		kPerH: kinetics.kPerH
	});
	return {
		key,
		label,
		regimen,
		kinetics: { kPerH: kinetics.kPerH, volumeL: kinetics.volumeL, clearanceLPerH: kinetics.clearanceLPerH, halfLifeH: kinetics.halfLifeH },
		points: points.map((p) => ({ tH: p.tH, mgL: Math.round(p.mgL * 1000) / 1000 })),
		peakMgL: ss.peakMgL,
		troughMgL: ss.troughMgL,
		auc24MgHL: auc24({ dailyDoseMg: (regimen.doseMg * 24) / regimen.intervalH, clearanceLPerH: kinetics.clearanceLPerH })
	};
}
