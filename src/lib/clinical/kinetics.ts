// One-compartment, first-order kinetics (clinical-reference F10–F12, F14, F15).
import { ClinicalInputError, requireFinite, requireNonNegative, requirePositive, requirePositiveInteger } from './errors';

export type OneCompartment = { kPerH: number; halfLifeH: number };

/** k = CL / Vd, t½ = ln2 / k (F10; textbook identities, e.g. Rowland & Tozer, Clinical Pharmacokinetics). */
export function oneCompartment(args: { clearanceLPerH: number; volumeL: number }): OneCompartment {
	const clearanceLPerH = requirePositive('clearanceLPerH', args.clearanceLPerH);
	const volumeL = requirePositive('volumeL', args.volumeL);
	const kPerH = clearanceLPerH / volumeL;
	return { kPerH, halfLifeH: Math.LN2 / kPerH };
}

export const AMINOGLYCOSIDE_K_SLOPE = 0.00293;
export const AMINOGLYCOSIDE_K_INTERCEPT = 0.014;
export const AMINOGLYCOSIDE_VD_L_PER_KG = 0.26;

/**
 * Aminoglycoside elimination rate from CrCl (F14): k = 0.00293 × CrCl + 0.014 h⁻¹ (coefficients seen in
 * clinical-PK teaching material; primary attribution not confirmed). CrCl 0 (anuric) is allowed.
 */
export function aminoglycosideK(args: { crclMlMin: number }): OneCompartment {
	const crclMlMin = requireNonNegative('crclMlMin', args.crclMlMin);
	const kPerH = AMINOGLYCOSIDE_K_SLOPE * crclMlMin + AMINOGLYCOSIDE_K_INTERCEPT;
	return { kPerH, halfLifeH: Math.LN2 / kPerH };
}

export const VANCOMYCIN_VD_L_PER_KG = 0.7;

export type PopulationKinetics = { clearanceLPerH: number; volumeL: number; kPerH: number; halfLifeH: number };

/**
 * Vancomycin population estimate (F15) — Matzke GR et al., Antimicrob Agents Chemother 1984;25:433–437:
 * CL (mL/min) = 3.66 + 0.689 × CrCl; × 0.06 → L/h. Vd = vdPerKg × weight (default 0.7 L/kg).
 */
export function vancomycinPopulation(args: { crclMlMin: number; weightKg: number; vdPerKg?: number }): PopulationKinetics {
	const crclMlMin = requireNonNegative('crclMlMin', args.crclMlMin);
	const weightKg = requirePositive('weightKg', args.weightKg);
	const vdPerKg = args.vdPerKg === undefined ? VANCOMYCIN_VD_L_PER_KG : requirePositive('vdPerKg', args.vdPerKg);
	const clearanceLPerH = vancomycinClearanceLPerH(crclMlMin);
	const volumeL = vdPerKg * weightKg;
	const kPerH = clearanceLPerH / volumeL;
	return { clearanceLPerH, volumeL, kPerH, halfLifeH: Math.LN2 / kPerH };
}

export function vancomycinClearanceLPerH(crclMlMin: number): number {
	return (3.66 + 0.689 * crclMlMin) * 0.06;
}

/** Accumulation factor R = 1 / (1 − e^(−kτ)) (F11). */
export function accumulationFactor(args: { kPerH: number; tauH: number }): number {
	const kPerH = requirePositive('kPerH', args.kPerH);
	const tauH = requirePositive('tauH', args.tauH);
	return 1 / (1 - Math.exp(-kPerH * tauH));
}

type InfusionArgs = { doseMg: number; infusionH: number; tauH: number; volumeL: number; kPerH: number };

function checkInfusion(args: InfusionArgs): void {
	requirePositive('doseMg', args.doseMg);
	requireNonNegative('infusionH', args.infusionH);
	requirePositive('tauH', args.tauH);
	requirePositive('volumeL', args.volumeL);
	requirePositive('kPerH', args.kPerH);
	if (args.infusionH > args.tauH) throw new ClinicalInputError('infusionH', args.infusionH, 'must not exceed tauH');
}

/**
 * Concentration at the end of one infusion (start at 0, no drug before), mg/L: k0 (1 − e^(−k·tinf)) / (k V),
 * k0 = dose / tinf. tinf = 0 is an IV bolus (limit dose / V).
 */
function singleDosePeak(doseMg: number, infusionH: number, volumeL: number, kPerH: number): number {
	const x = kPerH * infusionH;
	// below ~1e-9 the infusion is a bolus to machine precision (and x could underflow to 0)
	if (x < 1e-9) return (doseMg / volumeL) * (1 - x / 2);
	// (1 − e^−x)/x via expm1 keeps precision for short infusions of slowly cleared drugs.
	return ((doseMg / volumeL) * -Math.expm1(-x)) / x;
}

/**
 * Steady-state peak (end of infusion) and trough (pre-dose) of intermittent infusions, mg/L (F12,
 * Sawchuk–Zaske form; Sawchuk RJ, Zaske DE, J Pharmacokinet Biopharm 1976;4:183–195):
 * Cmax,ss = k0 (1 − e^(−k tinf)) / (k V (1 − e^(−kτ))); Cmin,ss = Cmax,ss × e^(−k(τ − tinf)).
 */
export function steadyStateInfusion(args: InfusionArgs): { peakMgL: number; troughMgL: number } {
	checkInfusion(args);
	return steadyStateInfusionRaw(args.doseMg, args.infusionH, args.tauH, args.volumeL, args.kPerH);
}

export function steadyStateInfusionRaw(
	doseMg: number,
	infusionH: number,
	tauH: number,
	volumeL: number,
	kPerH: number
): { peakMgL: number; troughMgL: number } {
	const peakMgL = singleDosePeak(doseMg, infusionH, volumeL, kPerH) / -Math.expm1(-kPerH * tauH);
	return { peakMgL, troughMgL: peakMgL * Math.exp(-kPerH * (tauH - infusionH)) };
}

/**
 * Peak at the end of the n-th infusion, mg/L (F11 superposition): single-dose peak × (1 − e^(−nkτ)) / (1 − e^(−kτ)).
 */
export function peakAfterDoses(args: InfusionArgs & { doses: number }): number {
	checkInfusion(args);
	const doses = requirePositiveInteger('doses', args.doses);
	const { doseMg, infusionH, tauH, volumeL, kPerH } = args;
	return (singleDosePeak(doseMg, infusionH, volumeL, kPerH) * -Math.expm1(-doses * kPerH * tauH)) / -Math.expm1(-kPerH * tauH);
}

export type ConcentrationPoint = { tH: number; mgL: number };

export const MAX_CURVE_POINTS = 100_000;

/**
 * Concentration–time curve of intermittent infusions given every intervalH from t = 0, by superposition of
 * single infusions (F11, F12). Each dose i (start sᵢ = i τ) contributes, at time t ≥ sᵢ:
 * during infusion k0/(kV) (1 − e^(−k(t − sᵢ))); afterwards k0/(kV) (1 − e^(−k tinf)) e^(−k(t − sᵢ − tinf)).
 */
export function concentrationCurve(args: {
	regimen: { doseMg: number; intervalH: number; infusionH: number };
	kPerH: number;
	volumeL: number;
	fromH: number;
	toH: number;
	stepH: number;
}): ConcentrationPoint[] {
	if (args.regimen == null || typeof args.regimen !== 'object') {
		throw new ClinicalInputError('regimen', args.regimen, 'must be { doseMg, intervalH, infusionH }');
	}
	const doseMg = requirePositive('regimen.doseMg', args.regimen.doseMg);
	const tauH = requirePositive('regimen.intervalH', args.regimen.intervalH);
	const infusionH = requireNonNegative('regimen.infusionH', args.regimen.infusionH);
	if (infusionH > tauH) throw new ClinicalInputError('regimen.infusionH', infusionH, 'must not exceed regimen.intervalH');
	const kPerH = requirePositive('kPerH', args.kPerH);
	const volumeL = requirePositive('volumeL', args.volumeL);
	const fromH = requireNonNegative('fromH', args.fromH);
	const toH = requireFinite('toH', args.toH);
	if (toH < fromH) throw new ClinicalInputError('toH', toH, 'must be ≥ fromH');
	const stepH = requirePositive('stepH', args.stepH);
	const count = Math.floor((toH - fromH) / stepH + 1e-9) + 1;
	if (count > MAX_CURVE_POINTS) throw new ClinicalInputError('stepH', stepH, `gives more than ${MAX_CURVE_POINTS} points`);
	const points: ConcentrationPoint[] = new Array(count);
	for (let p = 0; p < count; p++) {
		const tH = fromH + p * stepH;
		points[p] = { tH, mgL: concentrationAtRaw(doseMg, tauH, infusionH, kPerH, volumeL, tH) };
	}
	return points;
}

/** Concentration at tH of the regimen started at 0 (superposition; see concentrationCurve). */
export function concentrationAtRaw(doseMg: number, tauH: number, infusionH: number, kPerH: number, volumeL: number, tH: number): number {
	if (tH < 0) return 0;
	// an infusion shorter than ~4 µs is a bolus (avoids dose / tinf overflowing)
	if (infusionH < 1e-9) infusionH = 0;
	const lastDose = Math.floor(tH / tauH + 1e-12);
	let mgL = 0;
	for (let i = 0; i <= lastDose; i++) {
		const since = tH - i * tauH;
		if (since < 0) continue;
		if (infusionH === 0) {
			mgL += (doseMg / volumeL) * Math.exp(-kPerH * since);
		} else if (since < infusionH) {
			mgL += (doseMg / infusionH / (kPerH * volumeL)) * -Math.expm1(-kPerH * since);
		} else {
			mgL += singleDosePeak(doseMg, infusionH, volumeL, kPerH) * Math.exp(-kPerH * (since - infusionH));
		}
	}
	return mgL;
}

/** Steady-state AUC over 24 h, mg·h/L: bioavailable daily dose / CL (F10: Css,avg = F·Dose / (CL·τ)). */
export function auc24(args: { dailyDoseMg: number; clearanceLPerH: number; bioavailability?: number }): number {
	const dailyDoseMg = requireNonNegative('dailyDoseMg', args.dailyDoseMg);
	const clearanceLPerH = requirePositive('clearanceLPerH', args.clearanceLPerH);
	const f = args.bioavailability === undefined ? 1 : requireNonNegative('bioavailability', args.bioavailability);
	if (f > 1) throw new ClinicalInputError('bioavailability', f, 'must be a fraction in [0, 1]');
	return (f * dailyDoseMg) / clearanceLPerH;
}

/** Loading dose, mg: Vd × C_target (÷ F when not IV) (F10). */
export function loadingDose(args: { volumeL: number; targetMgL: number; bioavailability?: number }): number {
	const volumeL = requirePositive('volumeL', args.volumeL);
	const targetMgL = requirePositive('targetMgL', args.targetMgL);
	const f = args.bioavailability === undefined ? 1 : requirePositive('bioavailability', args.bioavailability);
	if (f > 1) throw new ClinicalInputError('bioavailability', f, 'must be a fraction in (0, 1]');
	return (volumeL * targetMgL) / f;
}

/** Maintenance dose rate, mg/h: CL × Css,avg (÷ F when not IV) (F10). */
export function maintenanceRate(args: { clearanceLPerH: number; targetAvgMgL: number; bioavailability?: number }): number {
	const clearanceLPerH = requirePositive('clearanceLPerH', args.clearanceLPerH);
	const targetAvgMgL = requirePositive('targetAvgMgL', args.targetAvgMgL);
	const f = args.bioavailability === undefined ? 1 : requirePositive('bioavailability', args.bioavailability);
	if (f > 1) throw new ClinicalInputError('bioavailability', f, 'must be a fraction in (0, 1]');
	return (clearanceLPerH * targetAvgMgL) / f;
}
