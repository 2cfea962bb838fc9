// Renal function estimates (clinical-reference F4–F7, F9) and kinetic GFR while creatinine changes.
import { requireAdultAge, requireNonNegative, requirePositive, requireSex } from './errors';
import { creatinineMgDl } from './units';
import type { Creatinine, Sex } from './types';

export const ARC_THRESHOLD_ML_MIN = 130;
/** total body water as the creatinine distribution volume, L/kg (from memory; common textbook value) */
export const CREATININE_WATER_L_PER_KG = 0.6;

/**
 * Cockcroft–Gault, mL/min (not BSA-indexed) — Cockcroft DW, Gault MH, Nephron 1976;16:31–41:
 * (140 − age) × weight / (72 × SCr mg/dL), × 0.85 if female. Inputs trusted (see cockcroftGault).
 */
export function cockcroftGaultRaw(ageYears: number, female: boolean, weightKg: number, scrMgDl: number): number {
	const crcl = ((140 - ageYears) * weightKg) / (72 * scrMgDl);
	return female ? crcl * 0.85 : crcl;
}

export function cockcroftGault(args: { ageYears: number; sex: Sex; weightKg: number; creatinine: Creatinine }): number {
	const ageYears = requireAdultAge('ageYears', args.ageYears);
	const sex = requireSex('sex', args.sex);
	const weightKg = requirePositive('weightKg', args.weightKg);
	const scr = creatinineMgDl(args.creatinine);
	return cockcroftGaultRaw(ageYears, sex === 'female', weightKg, scr);
}

/**
 * CKD-EPI 2021 creatinine equation without race, mL/min/1.73 m² — Inker LA et al., N Engl J Med 2021;385:1737–1749:
 * 142 × min(SCr/κ,1)^α × max(SCr/κ,1)^−1.200 × 0.9938^age × 1.012 [female]; κ 0.7 F / 0.9 M; α −0.241 F / −0.302 M.
 */
export function ckdEpi2021Raw(ageYears: number, female: boolean, scrMgDl: number): number {
	const kappa = female ? 0.7 : 0.9;
	const alpha = female ? -0.241 : -0.302;
	const ratio = scrMgDl / kappa;
	const egfr = 142 * Math.pow(Math.min(ratio, 1), alpha) * Math.pow(Math.max(ratio, 1), -1.2) * Math.pow(0.9938, ageYears);
	return female ? egfr * 1.012 : egfr;
}

export function ckdEpi2021(args: { ageYears: number; sex: Sex; creatinine: Creatinine }): number {
	const ageYears = requireAdultAge('ageYears', args.ageYears);
	const sex = requireSex('sex', args.sex);
	return ckdEpi2021Raw(ageYears, sex === 'female', creatinineMgDl(args.creatinine));
}

/**
 * MDRD 4-variable, IDMS-traceable "175" version without the obsolete race factor, mL/min/1.73 m² —
 * Levey AS et al., Ann Intern Med 2006;145:247–254 (citation from memory): 175 × SCr^−1.154 × age^−0.203 × 0.742 [female].
 */
export function mdrd175(args: { ageYears: number; sex: Sex; creatinine: Creatinine }): number {
	const ageYears = requireAdultAge('ageYears', args.ageYears);
	const sex = requireSex('sex', args.sex);
	const scr = creatinineMgDl(args.creatinine);
	const egfr = 175 * Math.pow(scr, -1.154) * Math.pow(ageYears, -0.203);
	return sex === 'female' ? egfr * 0.742 : egfr;
}

/** De-indexed eGFR for drug dosing, mL/min: eGFR × BSA / 1.73 (F7, common practice). */
export function deindexEgfr(args: { egfr: number; bsaM2: number }): number {
	const egfr = requirePositive('egfr', args.egfr);
	const bsaM2 = requirePositive('bsaM2', args.bsaM2);
	return (egfr * bsaM2) / 1.73;
}

/**
 * Possible augmented renal clearance: CrCl ≥ 130 — Udy AA et al., Crit Care Med 2014;42:520–527
 * (defined on measured urinary CrCl; an estimated CrCl is only a surrogate, hence "possible").
 */
export function augmentedRenalClearance(args: { crclMlMin: number }): boolean {
	return requireNonNegative('crclMlMin', args.crclMlMin) >= ARC_THRESHOLD_ML_MIN;
}

/**
 * Largest possible creatinine rise per day (GFR = 0): steady-state production over the creatinine
 * distribution volume. Production = SSPCr × CrCl_ss (steady state: production = clearance × concentration);
 * volume = 0.6 L/kg × weight (total body water, from memory). Result in mg/dL per day:
 * SSPCr[mg/dL] × CrCl[mL/min] / 100 [mL/dL] × 1440 [min/day] / (0.6 × W × 10 [dL]).
 */
export function creatinineMaxRisePerDay(args: {
	steadyStateCreatinine: Creatinine;
	steadyStateCrclMlMin: number;
	weightKg: number;
	waterLPerKg?: number;
}): number {
	const ssp = creatinineMgDl(args.steadyStateCreatinine, 'steadyStateCreatinine');
	const crcl = requirePositive('steadyStateCrclMlMin', args.steadyStateCrclMlMin);
	const weightKg = requirePositive('weightKg', args.weightKg);
	const water = args.waterLPerKg === undefined ? CREATININE_WATER_L_PER_KG : requirePositive('waterLPerKg', args.waterLPerKg);
	return creatinineMaxRisePerDayRaw(ssp, crcl, weightKg, water);
}

export function creatinineMaxRisePerDayRaw(sspMgDl: number, crclMlMin: number, weightKg: number, waterLPerKg: number): number {
	return (((sspMgDl * crclMlMin) / 100) * 1440) / (waterLPerKg * weightKg * 10);
}

export type KineticGfrArgs = {
	/** SSPCr: creatinine at the last steady state (the baseline) */
	steadyStateCreatinine: Creatinine;
	/** CrCl_ss: clearance estimated at that steady state (e.g. Cockcroft–Gault on the baseline), mL/min */
	steadyStateCrclMlMin: number;
	/** the earlier of two consecutive creatinine results */
	firstCreatinine: Creatinine;
	/** the later of the two */
	secondCreatinine: Creatinine;
	/** hours between the two results (Δt) */
	intervalH: number;
	/** MaxΔPCr/day: the rise per day if GFR were 0, mg/dL/day (see creatinineMaxRisePerDay) */
	maxRiseMgDlPerDay: number;
};

/**
 * Kinetic GFR, mL/min — Chen S, J Am Soc Nephrol 2013;24:877–888:
 * KeGFR = (SSPCr × CrCl_ss / MeanPCr) × (1 − 24 × ΔPCr / (Δt_h × MaxΔPCr/day)),
 * MeanPCr = mean of the two results, ΔPCr = second − first (mg/dL). A rise faster than MaxΔPCr/day would
 * give a negative value; it is reported as 0 (no filtration) because a clearance cannot be negative.
 */
export function kineticGfr(args: KineticGfrArgs): number {
	const ssp = creatinineMgDl(args.steadyStateCreatinine, 'steadyStateCreatinine');
	const crclSs = requirePositive('steadyStateCrclMlMin', args.steadyStateCrclMlMin);
	const first = creatinineMgDl(args.firstCreatinine, 'firstCreatinine');
	const second = creatinineMgDl(args.secondCreatinine, 'secondCreatinine');
	const intervalH = requirePositive('intervalH', args.intervalH);
	const maxRise = requirePositive('maxRiseMgDlPerDay', args.maxRiseMgDlPerDay);
	return kineticGfrRaw(ssp, crclSs, first, second, intervalH, maxRise);
}

export function kineticGfrRaw(
	sspMgDl: number,
	crclSsMlMin: number,
	firstMgDl: number,
	secondMgDl: number,
	intervalH: number,
	maxRiseMgDlPerDay: number
): number {
	const meanMgDl = (firstMgDl + secondMgDl) / 2;
	const value = ((sspMgDl * crclSsMlMin) / meanMgDl) * (1 - (24 * (secondMgDl - firstMgDl)) / (intervalH * maxRiseMgDlPerDay));
	return value > 0 ? value : 0;
}
