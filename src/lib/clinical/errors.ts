// Typed input errors for the clinical core. Every check names the input at fault so that the
// feed, the worker and the pages can say which value was wrong without parsing messages.
import type { Sex } from './types';

export class ClinicalInputError extends Error {
	/** name of the offending input, e.g. "creatinine.value" or "ageYears" */
	readonly input: string;
	readonly value: unknown;

	constructor(input: string, value: unknown, requirement: string) {
		super(`${input} ${requirement} (got ${describe(value)})`);
		this.name = 'ClinicalInputError';
		this.input = input;
		this.value = value;
	}
}

function describe(value: unknown): string {
	if (typeof value === 'number' || typeof value === 'boolean' || value == null) return String(value);
	if (typeof value === 'string') return JSON.stringify(value);
	if (value instanceof Date) return Number.isNaN(value.getTime()) ? 'Invalid Date' : value.toISOString();
	return typeof value;
}

function isNumber(value: unknown): value is number {
	return typeof value === 'number' && Number.isFinite(value);
}

/** finite and > 0 */
export function requirePositive(input: string, value: unknown): number {
	if (!isNumber(value) || value <= 0) throw new ClinicalInputError(input, value, 'must be a finite number > 0');
	return value;
}

/** finite and ≥ 0 (e.g. CrCl 0 = anuric, infusion time 0 = bolus) */
export function requireNonNegative(input: string, value: unknown): number {
	if (!isNumber(value) || value < 0) throw new ClinicalInputError(input, value, 'must be a finite number ≥ 0');
	return value;
}

/** finite, in [0, 1] */
export function requireFraction(input: string, value: unknown): number {
	if (!isNumber(value) || value < 0 || value > 1) throw new ClinicalInputError(input, value, 'must be a fraction in [0, 1]');
	return value;
}

/** finite, in (0, 1] */
export function requirePositiveFraction(input: string, value: unknown): number {
	if (!isNumber(value) || value <= 0 || value > 1) throw new ClinicalInputError(input, value, 'must be a fraction in (0, 1]');
	return value;
}

export function requireFinite(input: string, value: unknown): number {
	if (!isNumber(value)) throw new ClinicalInputError(input, value, 'must be a finite number');
	return value;
}

/** positive integer (e.g. number of doses) */
export function requirePositiveInteger(input: string, value: unknown): number {
	if (!isNumber(value) || value < 1 || !Number.isInteger(value)) {
		throw new ClinicalInputError(input, value, 'must be a whole number ≥ 1');
	}
	return value;
}

export const ADULT_MIN_AGE_YEARS = 18;
export const MAX_AGE_YEARS = 120;

/**
 * The creatinine equations used here (Cockcroft–Gault, CKD-EPI 2021, MDRD) were derived in adults;
 * paediatric equations are out of scope, so an age below 18 is an input error rather than a silent estimate.
 */
export function requireAdultAge(input: string, value: unknown): number {
	if (!isNumber(value) || value < ADULT_MIN_AGE_YEARS || value > MAX_AGE_YEARS) {
		throw new ClinicalInputError(input, value, `must be an adult age in years (${ADULT_MIN_AGE_YEARS}–${MAX_AGE_YEARS})`);
	}
	return value;
}

export function requireSex(input: string, value: unknown): Sex {
	if (value !== 'female' && value !== 'male') throw new ClinicalInputError(input, value, "must be 'female' or 'male'");
	return value;
}

export function requireDate(input: string, value: unknown): number {
	if (!(value instanceof Date) || Number.isNaN(value.getTime())) {
		throw new ClinicalInputError(input, value, 'must be a valid Date');
	}
	return value.getTime();
}
