// The curves of the measured-levels chart: the concentration predicted by the doses actually given with the
// individual (fitted) kinetics and, dashed, with the population prior, up to now; and from the next dose on,
// the proposed regimen continued after those doses. Hours count from the first dose, as the fit's levels do.
// Pure (runs in the server and the browser); relative imports only.
import { concentrationAtMs } from './clinical/dosing-history';
import type { HistoryDose } from './clinical/levels-types';
import type { KineticsSnapshot } from './clinical/types';
import type { RegimenInput } from './projection';

const HOUR_MS = 3_600_000;
/** how far the proposal's curve runs past now, h */
export const LEVELS_AHEAD_H = 48;
/** the chart starts at most this long before now (older doses still count in the curve), h */
export const LEVELS_BACK_MAX_H = 96;
/** the chart starts this long before the earliest level when that is earlier, h */
export const LEVELS_MARGIN_H = 12;
/** grid points per curve, at most (dose starts and ends are added so the peaks are exact) */
export const LEVELS_CURVE_POINTS = 300;

export type CurvePoint = { tH: number; mgL: number };

export type LevelCurves = {
	fromH: number;
	nowH: number;
	toH: number;
	/** doses given, individual kinetics, fromH → nowH */
	individual: CurvePoint[];
	/** doses given, population prior, fromH → nowH */
	population: CurvePoint[];
	/** doses given then the proposed regimen from proposalStartH, individual kinetics, nowH → toH */
	proposal: CurvePoint[];
	proposalStartH: number | null;
};

export type LevelCurvesInput = {
	doses: readonly HistoryDose[];
	atMs: number;
	individual: KineticsSnapshot | null;
	population: KineticsSnapshot | null;
	proposal: RegimenInput | null;
	/** the current order's interval: the next dose is due one interval after the last one started */
	currentIntervalH: number;
	/** hours (from the first dose) of the levels to show */
	levelTimesH: readonly number[];
};

const round = (n: number, digits: number) => Math.round(n * 10 ** digits) / 10 ** digits;

/** Sample times between a and b: an even grid plus every dose start and end inside. */
function sampleTimes(a: number, b: number, doseEdgesH: readonly number[]): number[] {
	if (!(b > a)) return [a];
	const stepH = Math.max(0.25, Math.ceil(((b - a) / LEVELS_CURVE_POINTS) * 4) / 4);
	const times = new Set<number>();
	for (let t = a; t < b; t += stepH) times.add(round(t, 4));
	times.add(round(b, 4));
	for (const e of doseEdgesH) if (e > a && e < b) times.add(round(e, 4));
	return [...times].sort((x, y) => x - y);
}

function curve(doses: readonly HistoryDose[], k: KineticsSnapshot, t0Ms: number, times: readonly number[]): CurvePoint[] {
	return times.map((tH) => ({ tH: round(tH, 3), mgL: round(concentrationAtMs(doses, k.kPerH, k.volumeL, t0Ms + tH * HOUR_MS), 3) }));
}

/** The chart's curves, or null when there is no dose to draw from. */
export function levelCurves(input: LevelCurvesInput): LevelCurves | null {
	const doses = [...input.doses].filter((d) => d.startMs <= input.atMs).sort((a, b) => a.startMs - b.startMs);
	if (doses.length === 0) return null;
	const t0Ms = doses[0].startMs;
	const nowH = (input.atMs - t0Ms) / HOUR_MS;
	const earliestLevelH = input.levelTimesH.length > 0 ? Math.min(...input.levelTimesH) : nowH;
	// a level drawn before the first dose (left out of the fit) still shows, an hour in from the left edge
	const fromH = Math.min(Math.max(0, Math.min(nowH - LEVELS_BACK_MAX_H, earliestLevelH - LEVELS_MARGIN_H)), earliestLevelH - 1);
	const toH = nowH + LEVELS_AHEAD_H;
	const edges = (ds: readonly HistoryDose[]) => ds.flatMap((d) => [(d.startMs - t0Ms) / HOUR_MS, (d.startMs - t0Ms) / HOUR_MS + d.durationH]);
	const past = sampleTimes(fromH, nowH, edges(doses));
	const result: LevelCurves = { fromH, nowH, toH, individual: [], population: [], proposal: [], proposalStartH: null };
	if (input.individual) result.individual = curve(doses, input.individual, t0Ms, past);
	if (input.population) result.population = curve(doses, input.population, t0Ms, past);
	if (input.individual && input.proposal) {
		const last = doses[doses.length - 1];
		const startMs = Math.max(input.atMs, last.startMs + input.currentIntervalH * HOUR_MS);
		const future: HistoryDose[] = [];
		for (let s = startMs; s < t0Ms + toH * HOUR_MS; s += input.proposal.intervalH * HOUR_MS) {
			future.push({ startMs: s, durationH: input.proposal.infusionH, doseMg: input.proposal.doseMg, source: 'scheduled' });
		}
		const all = [...doses, ...future];
		result.proposalStartH = round((startMs - t0Ms) / HOUR_MS, 3);
		result.proposal = curve(all, input.individual, t0Ms, sampleTimes(nowH, toH, edges(all)));
	}
	return result;
}
