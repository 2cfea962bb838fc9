// KDIGO 2012 AKI staging on creatinine (clinical-reference F8). Urine-output criteria and renal
// replacement therapy are out of scope.
import { ClinicalInputError, requireDate } from './errors';
import { CREATININE_UMOL_L_PER_MG_DL, creatinineDeltaMgDl, creatinineMgDl } from './units';
import type { Creatinine } from './types';

export type KdigoStage = 0 | 1 | 2 | 3;

export const AKI_RISE_MG_DL = 0.3;
export const AKI_RISE_UMOL_L = 26.5;
export const AKI_STAGE3_MG_DL = 4.0;
export const AKI_WINDOW_H = 48;
export const AKI_BASELINE_WINDOW_H = 7 * 24;
const HOUR_MS = 3_600_000;
// Rounding guard: 1.5 × 0.8 is 1.2000000000000002 in binary floating point.
const EPS = 1e-9;

/**
 * KDIGO stage from creatinine — KDIGO AKI Work Group, Kidney Int Suppl 2012;2:1–138.
 * AKI when the rise within 48 h is ≥ 0.3 mg/dL (≥ 26.5 µmol/L) or current ≥ 1.5 × baseline. Stage 3 at
 * ≥ 3.0 × baseline or SCr ≥ 4.0 mg/dL (353.6 µmol/L), the latter only when an AKI criterion is already met
 * (common practice); stage 2 at 2.0–2.9 ×; otherwise stage 1.
 */
export function kdigoStage(args: { baseline: Creatinine; current: Creatinine; riseWithin48h: Creatinine }): KdigoStage {
	const baselineMgDl = creatinineMgDl(args.baseline, 'baseline');
	const currentMgDl = creatinineMgDl(args.current, 'current');
	const riseMgDl = creatinineDeltaMgDl(args.riseWithin48h, 'riseWithin48h');
	return kdigoStageRaw(baselineMgDl, currentMgDl, riseMgDl);
}

export function kdigoStageRaw(baselineMgDl: number, currentMgDl: number, riseWithin48hMgDl: number): KdigoStage {
	const ratio = currentMgDl / baselineMgDl;
	const riseCriterion = riseWithin48hMgDl >= AKI_RISE_MG_DL - EPS || riseWithin48hMgDl * CREATININE_UMOL_L_PER_MG_DL >= AKI_RISE_UMOL_L - EPS;
	if (!riseCriterion && ratio < 1.5 - EPS) return 0;
	if (ratio >= 3 - EPS || currentMgDl >= AKI_STAGE3_MG_DL - EPS) return 3;
	if (ratio >= 2 - EPS) return 2;
	return 1;
}

export type CreatinineHistory = {
	stage: KdigoStage;
	/** lowest result in the 7 days up to `at`, mg/dL; null without results */
	baseline: Creatinine | null;
	/** latest result at or before `at`, mg/dL */
	current: Creatinine | null;
	/** largest rise between two results no more than 48 h apart inside the 7-day window, mg/dL (0 if none) */
	riseWithin48h: Creatinine | null;
	/** largest fall between two results no more than 48 h apart inside the 7-day window, mg/dL (0 if none) */
	fallWithin48h: Creatinine | null;
};

/** Scratch result of the numeric scan, shared with assess. */
export type CreatinineScan = {
	stage: KdigoStage;
	baselineMgDl: number;
	currentMgDl: number;
	riseWithin48hMgDl: number;
	fallWithin48hMgDl: number;
};

/**
 * Scan a series sorted by time (ascending), all at or before `atMs`, for KDIGO staging:
 * baseline = lowest value in the 7 days before `atMs` (common practice; clinical-reference F8),
 * 48-h rule on any pair of results no more than 48 h apart inside that window.
 * Returns null when no result lies in the window.
 */
export function scanCreatinine(timesMs: ArrayLike<number>, valuesMgDl: ArrayLike<number>, count: number, atMs: number): CreatinineScan | null {
	const fromMs = atMs - AKI_BASELINE_WINDOW_H * HOUR_MS;
	let first = -1;
	for (let i = 0; i < count; i++) {
		if (timesMs[i] >= fromMs) {
			first = i;
			break;
		}
	}
	if (first < 0) return null;
	let baseline = Infinity;
	let rise = 0;
	let fall = 0;
	const windowMs = AKI_WINDOW_H * HOUR_MS;
	for (let j = first; j < count; j++) {
		const vj = valuesMgDl[j];
		if (vj < baseline) baseline = vj;
		const tj = timesMs[j];
		for (let i = j - 1; i >= first; i--) {
			if (tj - timesMs[i] > windowMs) break;
			const d = vj - valuesMgDl[i];
			if (d > rise) rise = d;
			else if (-d > fall) fall = -d;
		}
	}
	const current = valuesMgDl[count - 1];
	return {
		stage: kdigoStageRaw(baseline, current, rise),
		baselineMgDl: baseline,
		currentMgDl: current,
		riseWithin48hMgDl: rise,
		fallWithin48hMgDl: fall
	};
}

/**
 * KDIGO stage from a creatinine history at time `at`: results after `at` are ignored; baseline is the lowest
 * result in the prior 7 days and the 48-h rise is the largest rise inside any 48-h window of that period.
 * The stage therefore reflects an AKI whose criteria were met within the last 7 days, including one that is
 * now recovering (recovery shows as a falling trend, see fallWithin48h).
 */
export function kdigoStageFromHistory(results: { at: Date; creatinine: Creatinine }[], at: Date): CreatinineHistory {
	const atMs = requireDate('at', at);
	if (!Array.isArray(results)) throw new ClinicalInputError('results', results, 'must be an array');
	const rows: { t: number; v: number }[] = [];
	for (let i = 0; i < results.length; i++) {
		const t = requireDate(`results[${i}].at`, results[i]?.at);
		const v = creatinineMgDl(results[i].creatinine, `results[${i}].creatinine`);
		if (t <= atMs) rows.push({ t, v });
	}
	rows.sort((a, b) => a.t - b.t);
	const times = rows.map((r) => r.t);
	const values = rows.map((r) => r.v);
	const scan = scanCreatinine(times, values, rows.length, atMs);
	if (!scan) return { stage: 0, baseline: null, current: null, riseWithin48h: null, fallWithin48h: null };
	return {
		stage: scan.stage,
		baseline: { value: scan.baselineMgDl, unit: 'mg/dL' },
		current: { value: scan.currentMgDl, unit: 'mg/dL' },
		riseWithin48h: { value: scan.riseWithin48hMgDl, unit: 'mg/dL' },
		fallWithin48h: { value: scan.fallWithin48hMgDl, unit: 'mg/dL' }
	};
}
