// Regimens: renal dose-adjustment factor (F13), dose bands, practical rounding.
import { ClinicalInputError, requireFraction, requireNonNegative, requirePositive } from './errors';
import type { DoseBand } from './types';

export const DEFAULT_CRCL_NORMAL_ML_MIN = 100;

/**
 * Renal dose-adjustment factor Q (F13) — Giusti DL, Hayton WL, Drug Intell Clin Pharm 1973;7:382–387;
 * Dettli L, Med Clin North Am 1974;58:977–985 (citations from memory): Q = 1 − fe × (1 − CrCl / CrCl_normal).
 * The CrCl ratio is capped at 1 (default 100 mL/min normal) unless allowAboveNormal models ARC deliberately.
 */
export function renalAdjustmentFactor(args: { fe: number; crclMlMin: number; crclNormalMlMin?: number; allowAboveNormal?: boolean }): number {
	const fe = requireFraction('fe', args.fe);
	const crclMlMin = requireNonNegative('crclMlMin', args.crclMlMin);
	const normal = args.crclNormalMlMin === undefined ? DEFAULT_CRCL_NORMAL_ML_MIN : requirePositive('crclNormalMlMin', args.crclNormalMlMin);
	return renalAdjustmentFactorRaw(fe, crclMlMin, normal, args.allowAboveNormal === true);
}

export function renalAdjustmentFactorRaw(fe: number, crclMlMin: number, crclNormalMlMin: number, allowAboveNormal: boolean): number {
	let ratio = crclMlMin / crclNormalMlMin;
	if (ratio > 1 && !allowAboveNormal) ratio = 1;
	return 1 - fe * (1 - ratio);
}

/** Practical dosing intervals, h (common practice). */
export const PRACTICAL_INTERVALS_H = [6, 8, 12, 18, 24, 36, 48, 72] as const;

/** Nearest practical interval on a log scale: the tipping point between 8 and 12 h is their geometric mean 9.8 h. */
export function roundIntervalH(intervalH: number): number {
	requirePositive('intervalH', intervalH);
	const list = PRACTICAL_INTERVALS_H;
	if (intervalH <= list[0]) return list[0];
	if (intervalH >= list[list.length - 1]) return list[list.length - 1];
	for (let i = 1; i < list.length; i++) {
		const hi = list[i];
		if (intervalH <= hi) {
			const lo = list[i - 1];
			// compare in log space: the geometric mean is the tipping point
			return intervalH * intervalH < lo * hi ? lo : hi;
		}
	}
	return list[list.length - 1];
}

/**
 * Dose step for rounding, mg (common practice; vial and syringe sizes): < 50 mg → 5; < 250 → 10;
 * < 1,000 → 50; < 3,000 → 250; otherwise 500.
 */
export function doseStepMg(doseMg: number): number {
	if (doseMg < 50) return 5;
	if (doseMg < 250) return 10;
	if (doseMg < 1000) return 50;
	if (doseMg < 3000) return 250;
	return 500;
}

/** Round a dose to the nearest practical step (never to 0: at least one step). */
export function roundDoseMg(doseMg: number): number {
	requirePositive('doseMg', doseMg);
	const step = doseStepMg(doseMg);
	const rounded = Math.round(doseMg / step) * step;
	return rounded > 0 ? rounded : step;
}

/** The band whose [minCrclMlMin, maxCrclMlMin) holds the CrCl; null bounds are open. First match wins. */
export function findBand(bands: readonly DoseBand[], crclMlMin: number): DoseBand | null {
	for (let i = 0; i < bands.length; i++) {
		const b = bands[i];
		if ((b.minCrclMlMin === null || crclMlMin >= b.minCrclMlMin) && (b.maxCrclMlMin === null || crclMlMin < b.maxCrclMlMin)) {
			return b;
		}
	}
	return null;
}

/** True when the band fixes a dose (mg or mg/kg) and an interval. */
export function bandHasRegimen(band: DoseBand): boolean {
	return (band.doseMg !== null || band.doseMgPerKg !== null) && band.intervalH !== null && band.avoid !== true;
}

/**
 * Dose per administration of a band, mg: the fixed dose, or mg/kg × weight (the agent's dosing weight).
 * null when the band has no dose or a mg/kg dose without a weight.
 */
export function bandDoseMg(band: DoseBand, weightKg: number | null): number | null {
	if (band.doseMg !== null) return band.doseMg;
	if (band.doseMgPerKg !== null && weightKg !== null) return band.doseMgPerKg * weightKg;
	return null;
}

/** Daily dose of a regimen, mg/day. */
export function dailyDoseMg(args: { doseMg: number; intervalH: number }): number {
	const doseMg = requireNonNegative('doseMg', args.doseMg);
	const intervalH = requirePositive('intervalH', args.intervalH);
	return (doseMg * 24) / intervalH;
}

export const DEFAULT_BAND_TOLERANCE = 0.2;

/**
 * Compare a daily dose with a reference daily dose: 'within' when the ratio lies in [1/(1+tol), 1+tol]
 * (default ±20 %, symmetric on a log scale, to absorb the dose ranges behind the bands; common practice).
 */
export function compareDailyDose(dailyMg: number, referenceDailyMg: number, tolerance = DEFAULT_BAND_TOLERANCE): 'above' | 'within' | 'below' {
	if (!(referenceDailyMg > 0)) throw new ClinicalInputError('referenceDailyMg', referenceDailyMg, 'must be a finite number > 0');
	const ratio = dailyMg / referenceDailyMg;
	if (ratio > (1 + tolerance) * (1 + 1e-9)) return 'above';
	if (ratio < (1 - 1e-9) / (1 + tolerance)) return 'below';
	return 'within';
}

const labels = new WeakMap<DoseBand, string>();

/** "CrCl 20–39 mL/min"-style label of a band (integer bounds read as [min, max − 1]); cached per band object. */
export function bandLabel(band: DoseBand): string {
	let label = labels.get(band);
	if (label === undefined) {
		const lo = band.minCrclMlMin;
		const hi = band.maxCrclMlMin;
		const upper = hi === null ? null : Number.isInteger(hi) && (lo === null || Number.isInteger(lo)) ? hi - 1 : hi;
		if (lo === null && hi === null) label = 'any CrCl';
		else if (lo === null) label = `CrCl < ${hi} mL/min`;
		else if (hi === null) label = `CrCl ≥ ${lo} mL/min`;
		else label = `CrCl ${lo}–${upper} mL/min`;
		labels.set(band, label);
	}
	return label;
}
