// Body size: ideal, adjusted and dosing weight, body surface area (clinical-reference F2, F3, F7).
import { ClinicalInputError, requirePositive, requireSex } from './errors';
import { CM_PER_INCH } from './units';
import type { Sex, WeightBasis } from './types';

/** Devine's formula is defined from 60 in (152.4 cm) upwards; below that it is extrapolated. */
export const DEVINE_MIN_HEIGHT_CM = 60 * CM_PER_INCH;
export const DEFAULT_OBESE_RATIO = 1.2;
export const ADJUSTED_WEIGHT_FACTOR = 0.4;

/**
 * Ideal body weight, kg — Devine BJ, Drug Intell Clin Pharm 1974;8:650–655:
 * 50 kg (male) or 45.5 kg (female) + 2.3 kg per inch over 60 in. Below 152.4 cm the line is extrapolated
 * (see devineInRange); a height so short that the line reaches 0 kg is rejected.
 */
export function idealBodyWeight(args: { heightCm: number; sex: Sex }): number {
	const heightCm = requirePositive('heightCm', args.heightCm);
	const sex = requireSex('sex', args.sex);
	const ibwKg = idealBodyWeightRaw(sex === 'female', heightCm);
	if (ibwKg <= 0) throw new ClinicalInputError('heightCm', heightCm, 'is too short for the Devine ideal-weight formula');
	return ibwKg;
}

/** The Devine line itself (the one place it is written); callers check the result is positive. */
export function idealBodyWeightRaw(female: boolean, heightCm: number): number {
	return (female ? 45.5 : 50) + 2.3 * (heightCm / CM_PER_INCH - 60);
}

/** true when the height lies in Devine's intended range (≥ 60 in); outside it the IBW is low-confidence. */
export function devineInRange(heightCm: number): boolean {
	return heightCm >= DEVINE_MIN_HEIGHT_CM;
}

/** Adjusted body weight, kg: IBW + 0.4 × (TBW − IBW) (F3; factor 0.4 is common practice). */
export function adjustedBodyWeight(args: { heightCm: number; sex: Sex; weightKg: number; factor?: number }): number {
	const weightKg = requirePositive('weightKg', args.weightKg);
	const factor = args.factor === undefined ? ADJUSTED_WEIGHT_FACTOR : requirePositive('factor', args.factor);
	const ibwKg = idealBodyWeight(args);
	return ibwKg + factor * (weightKg - ibwKg);
}

export type DosingWeight = { weightKg: number; basis: WeightBasis; idealKg: number };

/**
 * Weight for Cockcroft–Gault and weight-based dosing (clinical-reference F4, common practice):
 * actual weight if below IBW; IBW up to obeseRatio × IBW (default 1.2); adjusted weight above.
 */
export function dosingWeight(args: { heightCm: number; sex: Sex; weightKg: number; obeseRatio?: number }): DosingWeight {
	const weightKg = requirePositive('weightKg', args.weightKg);
	const obeseRatio = args.obeseRatio === undefined ? DEFAULT_OBESE_RATIO : requirePositive('obeseRatio', args.obeseRatio);
	if (obeseRatio < 1) throw new ClinicalInputError('obeseRatio', obeseRatio, 'must be ≥ 1');
	const idealKg = idealBodyWeight(args);
	return chooseDosingWeight(weightKg, idealKg, obeseRatio);
}

/** Shared by dosingWeight and assess (which has IBW already). Inputs are trusted here. */
export function chooseDosingWeight(weightKg: number, idealKg: number, obeseRatio: number): DosingWeight {
	if (weightKg < idealKg) return { weightKg, basis: 'actual', idealKg };
	if (weightKg <= obeseRatio * idealKg) return { weightKg: idealKg, basis: 'ideal', idealKg };
	return { weightKg: idealKg + ADJUSTED_WEIGHT_FACTOR * (weightKg - idealKg), basis: 'adjusted', idealKg };
}

/** BSA, m² — Mosteller RD, N Engl J Med 1987;317:1098: sqrt(height_cm × weight_kg / 3600). */
export function bsaMosteller(args: { heightCm: number; weightKg: number }): number {
	const heightCm = requirePositive('heightCm', args.heightCm);
	const weightKg = requirePositive('weightKg', args.weightKg);
	return Math.sqrt((heightCm * weightKg) / 3600);
}

/** BSA, m² — Du Bois D, Du Bois EF, Arch Intern Med 1916;17:863–871: 0.007184 × W^0.425 × H^0.725. */
export function bsaDuBois(args: { heightCm: number; weightKg: number }): number {
	const heightCm = requirePositive('heightCm', args.heightCm);
	const weightKg = requirePositive('weightKg', args.weightKg);
	return 0.007184 * Math.pow(weightKg, 0.425) * Math.pow(heightCm, 0.725);
}
