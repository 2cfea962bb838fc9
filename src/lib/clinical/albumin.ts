// Albumin binding (clinical-reference F16 and §4).
import { ClinicalInputError, requireNonNegative, requirePositive, requirePositiveFraction } from './errors';

export const DEFAULT_ALBUMIN_REF_G_L = 40;
/** agents at or above this binding get the albumin model (clinical-reference §3, "HB") */
export const HIGHLY_BOUND_THRESHOLD = 0.7;

/**
 * Unbound fraction at a new albumin (F16, single binding class, albumin in molar excess; mass action):
 * fu_new = 1 / (1 + ((1 − fu_ref)/fu_ref) × Alb_new/Alb_ref).
 */
export function unboundFraction(args: { fuRef: number; albuminRefGL?: number; albuminGL: number }): number {
	const fuRef = requirePositiveFraction('fuRef', args.fuRef);
	const albuminRefGL = args.albuminRefGL === undefined ? DEFAULT_ALBUMIN_REF_G_L : requirePositive('albuminRefGL', args.albuminRefGL);
	const albuminGL = requirePositive('albuminGL', args.albuminGL);
	return unboundFractionRaw(fuRef, albuminRefGL, albuminGL);
}

export function unboundFractionRaw(fuRef: number, albuminRefGL: number, albuminGL: number): number {
	return 1 / (1 + ((1 - fuRef) / fuRef) * (albuminGL / albuminRefGL));
}

/**
 * Øie–Tozer volume terms for a 70-kg adult (Øie S, Tozer TN, J Pharm Sci 1979;68:1203–1205; values from memory):
 * plasma volume 3 L, extracellular fluid outside plasma 12 L, extravascular/intravascular albumin ratio 1.4.
 * Scaled per kg of the agent's Vd weight.
 */
export const OIE_TOZER_PLASMA_L_PER_KG = 3 / 70;
export const OIE_TOZER_EXTRACELLULAR_L_PER_KG = 12 / 70;
export const OIE_TOZER_ALBUMIN_RATIO = 1.4;
/**
 * Conservative cap on the fu ratio used to scale CL and Vd: reviews report total CL/Vd rises of up to about
 * two-fold for highly bound antibacterials in hypoalbuminaemia (Ulldemolins M et al., Clin Pharmacokinet
 * 2011;50:99–110 — magnitude from memory).
 */
export const MAX_FU_RATIO = 2;

export type AlbuminAdjusted = {
	clearanceLPerH: number;
	volumeL: number;
	/** fu_new / fu_ref before the cap */
	fuRatio: number;
	/** the ratio actually applied (≤ MAX_FU_RATIO; 1 when albumin is at or above the reference) */
	fuRatioApplied: number;
	/** reference-albumin CL split: filtered renal part (fu × CrCl), secreted renal remainder, non-renal part */
	filteredLPerH: number;
	secretedLPerH: number;
	nonRenalLPerH: number;
	/** 'oie-tozer': plasma + extracellular + tissue terms; 'scaled-extracellular': Vd below the extracellular
	 * terms, so only those terms' relative change is applied */
	volumeModel: 'oie-tozer' | 'scaled-extracellular';
};

/**
 * Total CL and Vd of a highly bound, low-extraction agent at a lower albumin (clinical-reference F16, §4).
 *
 * Clearance: the filtered renal part (≤ fu_ref × CrCl) and the non-renal part are restrictive (∝ fu), so they
 * scale with fu_new/fu_ref; the secreted renal remainder is held constant (conservative).
 * Volume (Øie–Tozer): V = Vp(1 + R) + fu·(Ve − R·Vp) + Vt·fu/fu_ref, where the tissue term Vt is whatever
 * the reference Vd leaves after the plasma/extracellular terms; when the reference Vd is smaller than those
 * terms they are scaled to it. Vd therefore rises less than in proportion to fu.
 * The fu ratio is applied only when albumin is below the reference and is capped at MAX_FU_RATIO.
 * Unbound steady-state exposure is in theory unchanged (Antibiotics 2023;12:515): these are total levels.
 */
export function albuminAdjustedKinetics(args: {
	clearanceLPerH: number;
	renalClearanceLPerH: number;
	volumeL: number;
	weightKg: number;
	crclMlMin: number;
	fuRef: number;
	fuNew: number;
}): AlbuminAdjusted {
	const clearanceLPerH = requirePositive('clearanceLPerH', args.clearanceLPerH);
	const renalClearanceLPerH = requireNonNegative('renalClearanceLPerH', args.renalClearanceLPerH);
	if (renalClearanceLPerH > clearanceLPerH) {
		throw new ClinicalInputError('renalClearanceLPerH', renalClearanceLPerH, 'must not exceed clearanceLPerH');
	}
	const volumeL = requirePositive('volumeL', args.volumeL);
	const weightKg = requirePositive('weightKg', args.weightKg);
	const crclMlMin = requireNonNegative('crclMlMin', args.crclMlMin);
	const fuRef = requirePositiveFraction('fuRef', args.fuRef);
	const fuNew = requirePositiveFraction('fuNew', args.fuNew);
	return albuminAdjustedKineticsRaw(clearanceLPerH, renalClearanceLPerH, volumeL, weightKg, crclMlMin, fuRef, fuNew);
}

export function albuminAdjustedKineticsRaw(
	clearanceLPerH: number,
	renalClearanceLPerH: number,
	volumeL: number,
	weightKg: number,
	crclMlMin: number,
	fuRef: number,
	fuNew: number
): AlbuminAdjusted {
	const fuRatio = fuNew / fuRef;
	const applied = fuRatio <= 1 ? 1 : fuRatio > MAX_FU_RATIO ? MAX_FU_RATIO : fuRatio;
	const filterable = fuRef * crclMlMin * 0.06;
	const filteredLPerH = renalClearanceLPerH < filterable ? renalClearanceLPerH : filterable;
	const secretedLPerH = renalClearanceLPerH - filteredLPerH;
	const nonRenalLPerH = clearanceLPerH - renalClearanceLPerH;
	const newClearance = secretedLPerH + (filteredLPerH + nonRenalLPerH) * applied;

	const fuApplied = fuRef * applied;
	const a = OIE_TOZER_PLASMA_L_PER_KG * (1 + OIE_TOZER_ALBUMIN_RATIO) * weightKg;
	const b = (OIE_TOZER_EXTRACELLULAR_L_PER_KG - OIE_TOZER_ALBUMIN_RATIO * OIE_TOZER_PLASMA_L_PER_KG) * weightKg;
	const extracellularRef = a + b * fuRef;
	let newVolume: number;
	let volumeModel: AlbuminAdjusted['volumeModel'];
	if (volumeL >= extracellularRef) {
		newVolume = a + b * fuApplied + (volumeL - extracellularRef) * applied;
		volumeModel = 'oie-tozer';
	} else {
		newVolume = (volumeL * (a + b * fuApplied)) / extracellularRef;
		volumeModel = 'scaled-extracellular';
	}
	return {
		clearanceLPerH: newClearance,
		volumeL: newVolume,
		fuRatio,
		fuRatioApplied: applied,
		filteredLPerH,
		secretedLPerH,
		nonRenalLPerH,
		volumeModel
	};
}
