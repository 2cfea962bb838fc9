// The assessment's inputs laid out in time: the latest value at a moment, creatinine as a sorted series
// in mg/dL, renal replacement therapy in force, and the order's day of therapy. Pure; inputs checked.
import { ClinicalInputError } from './errors';
import { CREATININE_UMOL_L_PER_MG_DL } from './units';
import type { Creatinine, OrderInput, RenalReplacementEpisode, RenalReplacementMode } from './types';

export const HOUR_MS = 3_600_000;
export const DAY_MS = 24 * HOUR_MS;

type Timed = { at: Date };

/** Latest entry at or before tMs (entries need not be sorted). */
export function latestAtOrBefore<T extends Timed>(list: readonly T[], tMs: number, name: string): T | null {
	let best: T | null = null;
	let bestMs = -Infinity;
	for (let i = 0; i < list.length; i++) {
		const item = list[i];
		const ms = item.at instanceof Date ? item.at.getTime() : NaN;
		if (Number.isNaN(ms)) throw new ClinicalInputError(`${name}[${i}].at`, item.at, 'must be a valid Date');
		if (ms <= tMs && ms >= bestMs) {
			best = item;
			bestMs = ms;
		}
	}
	return best;
}

/** Earliest entry in (fromMs, toMs]. */
export function earliestWithin<T extends Timed>(list: readonly T[], fromMs: number, toMs: number): T | null {
	let best: T | null = null;
	let bestMs = Infinity;
	for (let i = 0; i < list.length; i++) {
		const ms = list[i].at.getTime();
		if (ms > fromMs && ms <= toMs && ms < bestMs) {
			best = list[i];
			bestMs = ms;
		}
	}
	return best;
}

function mgDl(c: Creatinine | undefined, index: number): number {
	if (c != null) {
		const v = c.value;
		if (typeof v === 'number' && v > 0 && v < Infinity) {
			if (c.unit === 'mg/dL') return v;
			if (c.unit === 'umol/L') return v / CREATININE_UMOL_L_PER_MG_DL;
			throw new ClinicalInputError(`creatinine[${index}].creatinine.unit`, c.unit, "must be 'mg/dL' or 'umol/L'");
		}
		throw new ClinicalInputError(`creatinine[${index}].creatinine.value`, v, 'must be a finite number > 0');
	}
	throw new ClinicalInputError(`creatinine[${index}].creatinine`, c, 'must be { value, unit }');
}

/** Creatinine results at or before atMs, ascending in time, in mg/dL (every result is checked). */
export type CreatinineSeries = { timesMs: number[]; valuesMgDl: number[] };

export function creatinineSeries(list: readonly { at: Date; creatinine: Creatinine }[], atMs: number): CreatinineSeries {
	const timesMs: number[] = [];
	const valuesMgDl: number[] = [];
	let sorted = true;
	for (let i = 0; i < list.length; i++) {
		const row = list[i];
		const t = row.at instanceof Date ? row.at.getTime() : NaN;
		if (Number.isNaN(t)) throw new ClinicalInputError(`creatinine[${i}].at`, row.at, 'must be a valid Date');
		const v = mgDl(row.creatinine, i);
		if (t > atMs) continue;
		if (timesMs.length > 0 && t < timesMs[timesMs.length - 1]) sorted = false;
		timesMs.push(t);
		valuesMgDl.push(v);
	}
	if (sorted) return { timesMs, valuesMgDl };
	const order = timesMs.map((_, i) => i).sort((a, b) => timesMs[a] - timesMs[b]);
	return { timesMs: order.map((i) => timesMs[i]), valuesMgDl: order.map((i) => valuesMgDl[i]) };
}

const RRT_MODES: readonly RenalReplacementMode[] = ['ihd', 'pd', 'crrt'];

/**
 * The renal replacement therapy in force at tMs, or null. When episodes overlap, the one that started
 * last wins (a patient moved from CRRT to intermittent haemodialysis).
 */
export function renalReplacementAt(episodes: readonly RenalReplacementEpisode[] | undefined, tMs: number): RenalReplacementMode | null {
	if (!episodes) return null;
	let mode: RenalReplacementMode | null = null;
	let fromMs = -Infinity;
	for (let i = 0; i < episodes.length; i++) {
		const e = episodes[i];
		if (!RRT_MODES.includes(e.mode)) throw new ClinicalInputError(`patient.renalReplacement[${i}].mode`, e.mode, "must be 'ihd', 'pd' or 'crrt'");
		const from = e.from instanceof Date ? e.from.getTime() : NaN;
		if (Number.isNaN(from)) throw new ClinicalInputError(`patient.renalReplacement[${i}].from`, e.from, 'must be a valid Date');
		const to = e.to == null ? Infinity : e.to.getTime();
		if (from <= tMs && tMs <= to && from >= fromMs) {
			mode = e.mode;
			fromMs = from;
		}
	}
	return mode;
}

/**
 * Where the order stands in its course at atMs: day of therapy (day 1 = the first 24 h from the first
 * dose), doses given so far on schedule, and whether it is still "new" (before its second dose) or in
 * the first interval after a documented restart — the only times a loading dose belongs.
 */
export type TherapyDay = { dayOfTherapy: number; dosesGiven: number; newOrder: boolean; restarted: boolean };

export function therapyDay(order: OrderInput, atMs: number): TherapyDay {
	const firstMs = order.firstDoseAt instanceof Date ? order.firstDoseAt.getTime() : order.startAt.getTime();
	const sinceFirstH = (atMs - firstMs) / HOUR_MS;
	const dosesGiven = sinceFirstH < 0 ? 0 : Math.floor(sinceFirstH / order.intervalH) + 1;
	const dayOfTherapy = sinceFirstH < 0 ? 1 : Math.floor(sinceFirstH / 24) + 1;
	const restartMs = order.restartAt instanceof Date ? order.restartAt.getTime() : null;
	const restarted = restartMs !== null && atMs >= restartMs - HOUR_MS && (atMs - restartMs) / HOUR_MS < order.intervalH;
	return { dayOfTherapy, dosesGiven, newOrder: dosesGiven < 2, restarted };
}
