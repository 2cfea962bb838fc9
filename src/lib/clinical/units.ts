// Unit conversions. Creatinine is handled in mg/dL internally, albumin in g/L (clinical-reference §1).
import { ClinicalInputError, requirePositive } from './errors';
import type { Creatinine } from './types';

/**
 * µmol/L per mg/dL of creatinine: 10 dL/L × 1000 µg/mg ÷ 113.12 g/mol = 88.40; the clinical convention
 * (KDIGO 2012 AKI guideline: 0.3 mg/dL = 26.5 µmol/L, 4.0 mg/dL = 353.6 µmol/L) uses 88.4.
 */
export const CREATININE_UMOL_L_PER_MG_DL = 88.4;
export const CREATININE_MOLAR_MASS_G_PER_MOL = 113.12;

/** exact by definition of the international inch (1959) */
export const CM_PER_INCH = 2.54;
/** exact by definition of the international avoirdupois pound (1959) */
export const KG_PER_POUND = 0.45359237;

function checkCreatinine(c: Creatinine, input: string): void {
	if (c == null || typeof c !== 'object') throw new ClinicalInputError(input, c, 'must be { value, unit }');
	if (c.unit !== 'mg/dL' && c.unit !== 'umol/L') {
		throw new ClinicalInputError(`${input}.unit`, c.unit, "must be 'mg/dL' or 'umol/L'");
	}
	requirePositive(`${input}.value`, c.value);
}

/** Serum creatinine in mg/dL (F1: µmol/L ÷ 88.4). */
export function creatinineMgDl(c: Creatinine, input = 'creatinine'): number {
	checkCreatinine(c, input);
	return c.unit === 'mg/dL' ? c.value : c.value / CREATININE_UMOL_L_PER_MG_DL;
}

/** Serum creatinine in µmol/L (F1: mg/dL × 88.4). */
export function creatinineUmolL(c: Creatinine, input = 'creatinine'): number {
	checkCreatinine(c, input);
	return c.unit === 'umol/L' ? c.value : c.value * CREATININE_UMOL_L_PER_MG_DL;
}

/** A creatinine difference (e.g. a 48-h rise) in mg/dL; may be 0. */
export function creatinineDeltaMgDl(c: Creatinine, input = 'creatinineDelta'): number {
	if (c == null || typeof c !== 'object') throw new ClinicalInputError(input, c, 'must be { value, unit }');
	if (c.unit !== 'mg/dL' && c.unit !== 'umol/L') {
		throw new ClinicalInputError(`${input}.unit`, c.unit, "must be 'mg/dL' or 'umol/L'");
	}
	if (typeof c.value !== 'number' || !Number.isFinite(c.value) || c.value < 0) {
		throw new ClinicalInputError(`${input}.value`, c.value, 'must be a finite number ≥ 0');
	}
	return c.unit === 'mg/dL' ? c.value : c.value / CREATININE_UMOL_L_PER_MG_DL;
}

export function albuminGLFromGdL(gdL: number): number {
	return requirePositive('albuminGdL', gdL) * 10;
}

export function cmFromInches(inches: number): number {
	return requirePositive('heightIn', inches) * CM_PER_INCH;
}

export function kgFromPounds(pounds: number): number {
	return requirePositive('weightLb', pounds) * KG_PER_POUND;
}

/** mL/min → L/h (× 60 / 1000) */
export function lPerHFromMlMin(mlMin: number): number {
	return mlMin * 0.06;
}

/** L/h → mL/min */
export function mlMinFromLPerH(lPerH: number): number {
	return lPerH / 0.06;
}
