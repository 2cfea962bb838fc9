// The patient at one moment: age and body size (ideal, adjusted and dosing weight, BSA). Called for
// the assessment time and again for the order's start, so both use the same formulas.
import { chooseDosingWeight, devineInRange, idealBodyWeightRaw, ADJUSTED_WEIGHT_FACTOR } from './body-size';
import { completedYearsRaw } from './age';
import { ClinicalInputError, requireAdultAge, requirePositive } from './errors';
import { latestAtOrBefore } from './timeline';
import { input, SOURCES, step } from './trace';
import type { AssessInput, Sex, TraceStep, WeightBasis } from './types';

export type BodySize = {
	heightCm: number | null;
	weightKg: number | null;
	idealKg: number | null;
	adjustedKg: number | null;
	/** Cockcroft–Gault and weight-based dosing weight: actual < IBW; IBW to obeseRatio × IBW; adjusted above */
	dosingKg: number | null;
	weightBasis: WeightBasis | null;
	bsaM2: number | null;
	/** false when the height is below Devine's intended range (IBW extrapolated); null without height */
	devineInRange: boolean | null;
	/** true when the weight is above obeseRatio × IBW, or (without height) when nothing can tell */
	obese: boolean | null;
};

export type BodySizeSettings = { obeseRatio: number; bsaFormula: 'mosteller' | 'dubois' };

/** Age in completed years at tMs (birth date when known, else the recorded age), checked to be adult. */
export function ageAt(patient: AssessInput['patient'], birthMs: number | null, tMs: number, name = 'patient.birthDate'): number {
	if (birthMs !== null) return requireAdultAge(name, completedYearsRaw(birthMs, tMs));
	return requireAdultAge('patient.ageYears', patient.ageYears);
}

/** Body size from the latest height and weight at or before tMs. */
export function bodySizeAt(patient: AssessInput['patient'], female: boolean, tMs: number, settings: BodySizeSettings): BodySize {
	const heightRow = latestAtOrBefore(patient.heights ?? [], tMs, 'patient.heights');
	const weightRow = latestAtOrBefore(patient.weights ?? [], tMs, 'patient.weights');
	return bodySize(
		heightRow === null ? null : requirePositive('patient.heights.cm', heightRow.cm),
		weightRow === null ? null : requirePositive('patient.weights.kg', weightRow.kg),
		female,
		settings
	);
}

export function bodySize(heightCm: number | null, weightKg: number | null, female: boolean, settings: BodySizeSettings): BodySize {
	let idealKg: number | null = null;
	if (heightCm !== null) {
		idealKg = idealBodyWeightRaw(female, heightCm);
		if (!(idealKg > 0)) throw new ClinicalInputError('patient.heights.cm', heightCm, 'is too short for the Devine ideal-weight formula');
	}
	let adjustedKg: number | null = null;
	let dosingKg: number | null = null;
	let weightBasis: WeightBasis | null = null;
	let bsaM2: number | null = null;
	let obese: boolean | null = null;
	if (weightKg !== null && idealKg !== null && heightCm !== null) {
		adjustedKg = idealKg + ADJUSTED_WEIGHT_FACTOR * (weightKg - idealKg);
		const chosen = chooseDosingWeight(weightKg, idealKg, settings.obeseRatio);
		dosingKg = chosen.weightKg;
		weightBasis = chosen.basis;
		obese = chosen.basis === 'adjusted';
		bsaM2 = settings.bsaFormula === 'dubois' ? 0.007184 * Math.pow(weightKg, 0.425) * Math.pow(heightCm, 0.725) : Math.sqrt((heightCm * weightKg) / 3600);
	} else if (weightKg !== null) {
		// no height: no IBW, so the actual weight stands in (said in the trace and the cautions)
		dosingKg = weightKg;
		weightBasis = 'actual';
	}
	return {
		heightCm,
		weightKg,
		idealKg,
		adjustedKg,
		dosingKg,
		weightBasis,
		bsaM2,
		devineInRange: heightCm === null ? null : devineInRange(heightCm),
		obese
	};
}

/** The weight an agent's Vd (and mg/kg doses) is scaled by. */
export function weightForBasis(basis: WeightBasis | 'dosing', body: BodySize): number | null {
	const actualKg = body.weightKg;
	if (actualKg === null) return null;
	switch (basis) {
		case 'actual':
			return actualKg;
		case 'ideal':
			return body.idealKg ?? actualKg;
		case 'adjusted':
			return body.adjustedKg ?? actualKg;
		default:
			return body.dosingKg ?? actualKg;
	}
}

export const BASIS_LABEL: Record<WeightBasis | 'dosing', string> = {
	actual: 'actual body weight',
	ideal: 'ideal body weight',
	adjusted: 'adjusted body weight',
	dosing: 'dosing weight'
};

/** The trace of body size: height, weight, IBW, adjusted and dosing weight, BSA. */
export function bodySizeTrace(body: BodySize, sex: Sex, settings: BodySizeSettings & { obeseRatioFromSettings: boolean }): TraceStep[] {
	const { heightCm, weightKg } = body;
	const trace: TraceStep[] = [
		step(
			'height',
			'Height',
			heightCm,
			'cm',
			'latest height at or before assessment time',
			[],
			SOURCES.record,
			heightCm === null ? 'no height recorded' : undefined
		),
		step(
			'weight',
			'Weight (actual)',
			weightKg,
			'kg',
			'latest weight at or before assessment time',
			[],
			SOURCES.record,
			weightKg === null ? 'no weight recorded' : undefined
		)
	];
	if (body.idealKg !== null) {
		trace.push(
			step(
				'ibw',
				'Ideal body weight (Devine)',
				body.idealKg,
				'kg',
				'IBW = 50 (M) | 45.5 (F) + 2.3 × (height_cm / 2.54 − 60)',
				[input('height', heightCm, 'cm', 'step height'), input('sex', sex, '', SOURCES.record)],
				SOURCES.devine,
				body.devineInRange === false ? 'height below 152.4 cm (60 in): Devine line extrapolated — low confidence' : undefined
			)
		);
	} else {
		trace.push(step('ibw', 'Ideal body weight (Devine)', null, 'kg', 'Devine', [], SOURCES.devine, 'not computed: no height'));
	}
	const bsaName = settings.bsaFormula === 'dubois' ? 'Body surface area (Du Bois)' : 'Body surface area (Mosteller)';
	const bsaFormula = settings.bsaFormula === 'dubois' ? 'BSA = 0.007184 × W^0.425 × H^0.725' : 'BSA = sqrt(H_cm × W_kg / 3600)';
	const bsaSource = settings.bsaFormula === 'dubois' ? SOURCES.duBois : SOURCES.mosteller;
	if (weightKg !== null && body.idealKg !== null) {
		trace.push(
			step(
				'adjbw',
				'Adjusted body weight',
				body.adjustedKg,
				'kg',
				'AdjBW = IBW + 0.4 × (TBW − IBW)',
				[input('IBW', body.idealKg, 'kg', 'step ibw'), input('TBW', weightKg, 'kg', 'step weight')],
				SOURCES.adjustedWeight
			),
			step(
				'dosingWeight',
				'Dosing weight',
				body.dosingKg,
				'kg',
				'actual if TBW < IBW; IBW if TBW ≤ obese ratio × IBW; AdjBW above',
				[
					input('TBW', weightKg, 'kg', 'step weight'),
					input('IBW', body.idealKg, 'kg', 'step ibw'),
					input('obese ratio', settings.obeseRatio, '', settings.obeseRatioFromSettings ? 'settings' : 'default'),
					input('basis', body.weightBasis, '', 'chosen')
				],
				SOURCES.weightChoice
			),
			step(
				'bsa',
				bsaName,
				body.bsaM2,
				'm2',
				bsaFormula,
				[input('height', heightCm, 'cm', 'step height'), input('weight', weightKg, 'kg', 'step weight')],
				bsaSource
			)
		);
	} else if (weightKg !== null) {
		trace.push(
			step('adjbw', 'Adjusted body weight', null, 'kg', 'AdjBW', [], SOURCES.adjustedWeight, 'not computed: no height'),
			step(
				'dosingWeight',
				'Dosing weight',
				body.dosingKg,
				'kg',
				'actual weight used because no height is recorded (IBW unknown)',
				[input('TBW', weightKg, 'kg', 'step weight')],
				SOURCES.weightChoice,
				'no height: actual weight used; obese patients will be over-estimated'
			),
			step('bsa', 'Body surface area', null, 'm2', 'BSA', [], SOURCES.mosteller, 'not computed: no height')
		);
	} else {
		trace.push(
			step('adjbw', 'Adjusted body weight', null, 'kg', 'AdjBW', [], SOURCES.adjustedWeight, 'not computed: no weight'),
			step('dosingWeight', 'Dosing weight', null, 'kg', 'weight choice', [], SOURCES.weightChoice, 'not computed: no weight'),
			step('bsa', 'Body surface area', null, 'm2', 'BSA', [], SOURCES.mosteller, 'not computed: no weight')
		);
	}
	return trace;
}
