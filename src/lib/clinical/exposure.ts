// Predicted steady-state exposure of a regimen: peak, trough (intermittent IV infusion, superposition)
// and AUC24 (any absorbed route). One function for the current order and for every proposal tried.
import { steadyStateInfusionRaw } from './kinetics';
import type { KineticsSnapshot } from './types';

export type Exposure = { peakMgL: number | null; troughMgL: number | null; auc24MgHL: number | null };

export const NO_EXPOSURE: Exposure = { peakMgL: null, troughMgL: null, auc24MgHL: null };

/**
 * Steady state of `doseMg` every `intervalH` (infused over `infusionH` when IV). AUC24 = F × daily dose /
 * CL for any absorbed route; peak and trough only for IV (absorption is not modelled for other routes).
 */
export function predictExposure(
	regimen: { doseMg: number; intervalH: number; infusionH: number },
	kinetics: KineticsSnapshot,
	bioavailability: number,
	iv: boolean
): Exposure {
	const dailyDoseMg = (regimen.doseMg * 24) / regimen.intervalH;
	const auc24MgHL = bioavailability > 0 ? (bioavailability * dailyDoseMg) / kinetics.clearanceLPerH : null;
	if (!iv) return { peakMgL: null, troughMgL: null, auc24MgHL };
	const ss = steadyStateInfusionRaw(regimen.doseMg, regimen.infusionH, regimen.intervalH, kinetics.volumeL, kinetics.kPerH);
	return { peakMgL: ss.peakMgL, troughMgL: ss.troughMgL, auc24MgHL };
}
