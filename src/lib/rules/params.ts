// Named rule parameters (thresholds): label, unit, allowed range and the source of each default.
// Administrators tune the values; the ranges keep a typo from switching a rule off or on for everyone.
import { DEFAULT_BAND_TOLERANCE } from '../clinical/regimen';
import type { ParamSpec } from './types';

// Sources shown to administrators name the publication or common practice; which citations are
// recalled rather than confirmed is recorded in the clinical reference, not on screens.
export const PARAM_SPECS = {
	bandTolerance: {
		label: 'Tolerance around the band’s daily dose',
		unit: 'fraction',
		min: 0,
		max: 1,
		step: 0.01,
		defaultValue: DEFAULT_BAND_TOLERANCE,
		source: 'common practice (the clinical core’s ±20 %, symmetric on a log scale)'
	},
	renalFeMin: {
		label: 'Renally cleared when fraction excreted unchanged is at least',
		unit: 'fraction',
		min: 0.1,
		max: 1,
		step: 0.05,
		defaultValue: 0.5,
		source: 'common practice (fe ≥ 0.5)'
	},
	arcCrclMlMin: {
		label: 'Possible augmented renal clearance from CrCl',
		unit: 'mL/min',
		min: 90,
		max: 250,
		step: 1,
		defaultValue: 130,
		source: 'Udy AA, Baptista JP, Lim NL et al., Crit Care Med 2014;42:520–527'
	},
	akiMinStage: {
		label: 'AKI from KDIGO stage',
		unit: '{stage}',
		min: 1,
		max: 3,
		step: 1,
		integer: true,
		defaultValue: 1,
		source: 'KDIGO AKI Work Group, Kidney Int Suppl 2012;2:1–138'
	},
	akiHighStage: {
		label: 'AKI is high severity from KDIGO stage',
		unit: '{stage}',
		min: 1,
		max: 3,
		step: 1,
		integer: true,
		defaultValue: 2,
		source: 'common practice'
	},
	halfLifeRatioMin: {
		label: 'Expected half-life at least this multiple of its value at the start',
		unit: '×',
		min: 1.1,
		max: 5,
		step: 0.1,
		defaultValue: 1.5,
		source: 'common practice'
	},
	highlyBoundMin: {
		label: 'Highly protein-bound from a binding of',
		unit: 'fraction',
		min: 0.3,
		max: 0.99,
		step: 0.01,
		defaultValue: 0.7,
		source: 'common practice (highly bound = binding ≥ 70 %; example threshold, confirm locally)'
	},
	albuminModerateGL: {
		label: 'Low albumin below',
		unit: 'g/L',
		min: 15,
		max: 40,
		step: 0.5,
		defaultValue: 30,
		source: 'common practice (albumin < 30 g/L; example threshold, confirm locally)'
	},
	albuminSevereGL: {
		label: 'Severely low albumin (high severity) below',
		unit: 'g/L',
		min: 10,
		max: 35,
		step: 0.5,
		defaultValue: 25,
		source: 'common practice (albumin < 25 g/L; example threshold, confirm locally)'
	},
	albuminMaxAgeH: {
		label: 'Albumin result counts while younger than',
		unit: 'h',
		min: 24,
		max: 720,
		step: 1,
		defaultValue: 168,
		source: 'common practice (the clinical core’s 7 days)'
	},
	creatinineMaxAgeH: {
		label: 'Missing creatinine when the latest is at least this old',
		unit: 'h',
		min: 12,
		max: 336,
		step: 1,
		defaultValue: 72,
		source: 'common practice (72 h)'
	},
	unstableChangeMgDl: {
		label: 'Unstable creatinine from a rise or fall within 48 h of',
		unit: 'mg/dL',
		min: 0.1,
		max: 2,
		step: 0.05,
		defaultValue: 0.3,
		source: 'KDIGO AKI Work Group, Kidney Int Suppl 2012;2:1–138 (0.3 mg/dL within 48 h)'
	},
	troughLimitFactor: {
		label: 'Trough above this multiple of the agent’s trough limit',
		unit: '×',
		min: 0.5,
		max: 3,
		step: 0.05,
		defaultValue: 1,
		source: 'agent library trough limits (example values, confirm locally)'
	},
	aucLowMgHL: {
		label: 'Vancomycin AUC24 below',
		unit: 'mg·h/L',
		min: 100,
		max: 800,
		step: 10,
		defaultValue: 400,
		source: 'Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864'
	},
	aucHighMgHL: {
		label: 'Vancomycin AUC24 above',
		unit: 'mg·h/L',
		min: 200,
		max: 1200,
		step: 10,
		defaultValue: 600,
		source: 'Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864'
	},
	vancomycinTroughMaxMgL: {
		label: 'Measured vancomycin trough above',
		unit: 'mg/L',
		min: 5,
		max: 40,
		step: 0.5,
		defaultValue: 20,
		source: 'Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864 (troughs above 15–20 mg/L add nephrotoxicity)'
	},
	levelDueAfterH: {
		label: 'Level due when a level-dosed order has run this long without one',
		unit: 'h',
		min: 12,
		max: 336,
		step: 1,
		defaultValue: 72,
		source: 'common practice (a first level within the first 72 h)'
	},
	levelDisagreementFactor: {
		label: 'Measured trough differs from the population prediction by more than this factor',
		unit: '×',
		min: 1.1,
		max: 10,
		step: 0.1,
		defaultValue: 2,
		source: 'common practice'
	}
} as const satisfies Record<string, ParamSpec>;

export type ParamName = keyof typeof PARAM_SPECS;
export const PARAM_NAMES = Object.keys(PARAM_SPECS) as ParamName[];

export function paramSpec(name: string): ParamSpec | undefined {
	return (PARAM_SPECS as Record<string, ParamSpec>)[name];
}

/** Pairs that must stay ordered: [lower, upper, message]. */
export const PARAM_ORDER: readonly [ParamName, ParamName, string][] = [
	['albuminSevereGL', 'albuminModerateGL', 'must be below the low-albumin threshold'],
	['aucLowMgHL', 'aucHighMgHL', 'must be below the upper AUC24 threshold'],
	['akiMinStage', 'akiHighStage', 'must not exceed the high-severity stage']
];
