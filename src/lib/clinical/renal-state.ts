// Renal function at the assessment time: creatinine history (KDIGO stage, stability), Cockcroft–Gault,
// CKD-EPI 2021, kinetic GFR while creatinine changes, possible ARC, renal replacement therapy, and the
// one CrCl that dosing uses. Pure; every number is traced.
import { AKI_RISE_MG_DL, scanCreatinine, type CreatinineScan } from './aki';
import { ARC_THRESHOLD_ML_MIN, CREATININE_WATER_L_PER_KG, ckdEpi2021Raw, cockcroftGaultRaw, creatinineMaxRisePerDayRaw, kineticGfrRaw } from './renal-function';
import { HOUR_MS, type CreatinineSeries } from './timeline';
import { input, SOURCES, step } from './trace';
import type { BodySize } from './patient-state';
import type { RenalReplacementMode, Sex, TraceStep } from './types';

/** minimum spacing of the two creatinine results used for kinetic GFR (common practice) */
export const KINETIC_GFR_MIN_INTERVAL_H = 6;
const EPS = 1e-9;

export const RRT_LABEL: Record<RenalReplacementMode, string> = {
	ihd: 'intermittent haemodialysis',
	pd: 'peritoneal dialysis',
	crrt: 'continuous renal replacement therapy'
};

/**
 * Which renal function doses are based on:
 * - 'cockcroft-gault': creatinine stable, Cockcroft–Gault CrCl;
 * - 'lower-of-cg-and-kinetic-gfr': creatinine changing, the lower of Cockcroft–Gault and kinetic GFR
 *   (a rising creatinine lags the fall in filtration; a falling one overstates the recovery less);
 * - 'unstable-no-kinetic-gfr': creatinine changing and kinetic GFR not computable: no proposal;
 * - 'renal-replacement': on dialysis or CRRT, the agent's regimen for it, not a CrCl;
 * - 'none': no current creatinine or weight.
 */
export type DosingBasis = 'cockcroft-gault' | 'lower-of-cg-and-kinetic-gfr' | 'unstable-no-kinetic-gfr' | 'renal-replacement' | 'none';

export type RenalState = {
	latestMgDl: number | null;
	latestAtMs: number | null;
	ageH: number | null;
	fresh: boolean;
	scan: CreatinineScan | null;
	kdigoStage: 0 | 1 | 2 | 3;
	stable: boolean;
	crclMlMin: number | null;
	egfrIndexed: number | null;
	egfrMlMin: number | null;
	kineticGfrMlMin: number | null;
	arc: boolean;
	renalReplacement: RenalReplacementMode | null;
	dosingCrclMlMin: number | null;
	dosingBasis: DosingBasis;
	missing: string[];
	trace: TraceStep[];
};

export type RenalArgs = {
	atMs: number;
	series: CreatinineSeries;
	ageYears: number;
	sex: Sex;
	body: BodySize;
	maxCreatinineAgeH: number;
	scrFloorMgDl: number | null;
	scrFloorFromSettings: boolean;
	kineticGfrMaxRiseMgDlPerDay: number | null;
	renalReplacement: RenalReplacementMode | null;
};

export function renalState(args: RenalArgs): RenalState {
	const { atMs, series, ageYears, sex, body, renalReplacement } = args;
	const female = sex === 'female';
	const times = series.timesMs;
	const values = series.valuesMgDl;
	const n = times.length;
	const trace: TraceStep[] = [];
	const missing: string[] = [];

	const latestMgDl = n > 0 ? values[n - 1] : null;
	const latestAtMs = n > 0 ? times[n - 1] : null;
	const ageH = latestAtMs === null ? null : (atMs - latestAtMs) / HOUR_MS;
	const fresh = ageH !== null && ageH <= args.maxCreatinineAgeH;
	if (latestMgDl === null) missing.push('creatinine');
	else if (!fresh) missing.push(`creatinine older than ${args.maxCreatinineAgeH} h`);
	trace.push(
		step(
			'creatinine',
			'Serum creatinine (latest)',
			latestMgDl,
			'mg/dL',
			'µmol/L ÷ 88.4 = mg/dL',
			[input('age of result', ageH, 'h', 'result time'), input('max age', args.maxCreatinineAgeH, 'h', SOURCES.agentLibrary)],
			SOURCES.creatinineUnits,
			latestMgDl === null ? 'no creatinine result' : fresh ? undefined : 'result older than the agent’s limit: renal estimates not computed'
		)
	);

	if (renalReplacement !== null) {
		trace.push(
			step(
				'renalReplacement',
				'Renal replacement therapy',
				RRT_LABEL[renalReplacement],
				'',
				'status from dialysis procedures and conditions in the record, or set by a pharmacist',
				[],
				SOURCES.record,
				'creatinine swings with each session: no KDIGO staging, no kinetic GFR, and Cockcroft–Gault is not used for dosing'
			)
		);
	}

	// On dialysis the pre/post-session swings are not acute kidney injury: not staged (KDIGO counts the
	// start of renal replacement therapy as stage 3; on an established programme staging means nothing).
	const scan = n > 0 && renalReplacement === null ? scanCreatinine(times, values, n, atMs) : null;
	const kdigoStage = scan === null ? 0 : scan.stage;
	const rise48 = scan === null ? null : scan.riseWithin48hMgDl;
	const fall48 = scan === null ? null : scan.fallWithin48hMgDl;
	const stable = scan !== null && kdigoStage === 0 && (rise48 as number) < AKI_RISE_MG_DL - EPS && (fall48 as number) < AKI_RISE_MG_DL - EPS;
	trace.push(
		step(
			'kdigo',
			'KDIGO AKI stage (creatinine)',
			kdigoStage,
			'{stage}',
			'rise ≥ 0.3 mg/dL within 48 h or ≥ 1.5 × baseline → 1; 2.0–2.9 × → 2; ≥ 3 × or ≥ 4.0 mg/dL → 3',
			[
				input('baseline (lowest in 7 days)', scan === null ? null : scan.baselineMgDl, 'mg/dL', 'creatinine history'),
				input('current', latestMgDl, 'mg/dL', 'step creatinine'),
				input('largest rise within 48 h', rise48, 'mg/dL', 'creatinine history')
			],
			SOURCES.kdigo,
			renalReplacement !== null ? 'not staged: on renal replacement therapy' : scan === null ? 'no creatinine in the last 7 days' : undefined
		),
		step(
			'creatinineStable',
			'Creatinine stable',
			stable,
			'',
			'stable when KDIGO stage 0 and no rise or fall ≥ 0.3 mg/dL within 48 h',
			[input('largest fall within 48 h', fall48, 'mg/dL', 'creatinine history')],
			SOURCES.commonPractice,
			renalReplacement !== null
				? 'not judged: on renal replacement therapy'
				: stable
					? undefined
					: 'Cockcroft–Gault assumes steady-state creatinine: treat CrCl as unreliable'
		)
	);

	// ── Cockcroft–Gault and CKD-EPI ────────────────────────────────────────────────────────────────
	let scrForCg: number | null = null;
	if (fresh) {
		scrForCg = latestMgDl as number;
		if (args.scrFloorMgDl !== null && scrForCg < args.scrFloorMgDl) {
			scrForCg = args.scrFloorMgDl;
			trace.push(
				step(
					'scrFloor',
					'Creatinine for Cockcroft–Gault (floored)',
					scrForCg,
					'mg/dL',
					'max(SCr, floor)',
					[input('SCr', latestMgDl, 'mg/dL', 'step creatinine'), input('floor', args.scrFloorMgDl, 'mg/dL', 'settings')],
					SOURCES.scrFloor
				)
			);
		}
	}
	const dosingKg = body.dosingKg;
	const crclMlMin = scrForCg !== null && dosingKg !== null ? cockcroftGaultRaw(ageYears, female, dosingKg, scrForCg) : null;
	trace.push(
		step(
			'crcl',
			'Creatinine clearance (Cockcroft–Gault)',
			crclMlMin,
			'mL/min',
			'(140 − age) × weight / (72 × SCr), × 0.85 if female',
			[
				input('age', ageYears, 'a', 'step age'),
				input('weight', dosingKg, 'kg', 'step dosingWeight'),
				input('SCr', scrForCg, 'mg/dL', args.scrFloorMgDl !== null && scrForCg === args.scrFloorMgDl ? 'step scrFloor' : 'step creatinine'),
				input('sex', sex, '', SOURCES.record)
			],
			SOURCES.cockcroftGault,
			crclMlMin === null
				? dosingKg === null
					? 'not computed: no weight'
					: 'not computed: no current creatinine'
				: renalReplacement !== null
					? 'on renal replacement therapy: shown for reference, not used for dosing'
					: stable
						? undefined
						: 'creatinine not at steady state'
		)
	);
	const egfrIndexed = fresh ? ckdEpi2021Raw(ageYears, female, latestMgDl as number) : null;
	const egfrMlMin = egfrIndexed !== null && body.bsaM2 !== null ? (egfrIndexed * body.bsaM2) / 1.73 : null;
	trace.push(
		step(
			'egfr',
			'eGFR (CKD-EPI 2021, creatinine)',
			egfrIndexed,
			'mL/min/{1.73_m2}',
			'142 × min(SCr/κ,1)^α × max(SCr/κ,1)^−1.200 × 0.9938^age × 1.012 [F]',
			[input('age', ageYears, 'a', 'step age'), input('SCr', fresh ? latestMgDl : null, 'mg/dL', 'step creatinine'), input('sex', sex, '', SOURCES.record)],
			SOURCES.ckdEpi2021,
			egfrIndexed === null ? 'not computed: no current creatinine' : undefined
		),
		step(
			'egfrMlMin',
			'eGFR de-indexed',
			egfrMlMin,
			'mL/min',
			'eGFR × BSA / 1.73',
			[input('eGFR', egfrIndexed, 'mL/min/{1.73_m2}', 'step egfr'), input('BSA', body.bsaM2, 'm2', 'step bsa')],
			SOURCES.deindex,
			egfrMlMin === null ? 'not computed: needs eGFR and BSA' : undefined
		)
	);

	// ── Kinetic GFR while creatinine changes ───────────────────────────────────────────────────────
	let kineticGfrMlMin: number | null = null;
	if (!stable && renalReplacement === null && fresh && dosingKg !== null && body.weightKg !== null && scan !== null && n >= 2) {
		// the two most recent results at least 6 h apart, both inside the 7-day window
		const secondT = times[n - 1];
		let prev = -1;
		for (let i = n - 2; i >= 0; i--) {
			if (secondT - times[i] >= KINETIC_GFR_MIN_INTERVAL_H * HOUR_MS) {
				prev = i;
				break;
			}
		}
		if (prev >= 0 && atMs - times[prev] <= 7 * 24 * HOUR_MS) {
			const baseline = scan.baselineMgDl;
			const baselineForCg = args.scrFloorMgDl !== null && baseline < args.scrFloorMgDl ? args.scrFloorMgDl : baseline;
			const crclSs = cockcroftGaultRaw(ageYears, female, dosingKg, baselineForCg);
			const maxRise = args.kineticGfrMaxRiseMgDlPerDay ?? creatinineMaxRisePerDayRaw(baseline, crclSs, body.weightKg, CREATININE_WATER_L_PER_KG);
			const intervalH = (secondT - times[prev]) / HOUR_MS;
			kineticGfrMlMin = kineticGfrRaw(baseline, crclSs, values[prev], values[n - 1], intervalH, maxRise);
			trace.push(
				step(
					'kineticGfr',
					'Kinetic GFR',
					kineticGfrMlMin,
					'mL/min',
					'KeGFR = (SSPCr × CrCl_ss / MeanPCr) × (1 − 24 × ΔPCr / (Δt × MaxΔPCr/day)); below 0 reported as 0',
					[
						input('SSPCr (baseline)', baseline, 'mg/dL', 'step kdigo'),
						input('CrCl_ss (Cockcroft–Gault at baseline)', crclSs, 'mL/min', 'Cockcroft–Gault'),
						input('first creatinine', values[prev], 'mg/dL', 'creatinine history'),
						input('second creatinine', values[n - 1], 'mg/dL', 'step creatinine'),
						input('Δt', intervalH, 'h', 'result times'),
						// the production estimate (0.6 L/kg body water) is recalled, not confirmed: see renal-function.ts
						input('MaxΔPCr/day', maxRise, 'mg/dL/d', args.kineticGfrMaxRiseMgDlPerDay === null ? 'creatinine production over 0.6 L/kg body water' : 'settings')
					],
					SOURCES.kineticGfr
				)
			);
		}
	}

	const arc = renalReplacement === null && crclMlMin !== null && crclMlMin >= ARC_THRESHOLD_ML_MIN;
	trace.push(
		step(
			'arc',
			'Possible augmented renal clearance',
			arc,
			'',
			'CrCl ≥ 130 mL/min',
			[input('CrCl', crclMlMin, 'mL/min', 'step crcl')],
			SOURCES.arc,
			'estimated CrCl is only a surrogate for measured urinary CrCl'
		)
	);

	// ── The one renal function dosing uses ─────────────────────────────────────────────────────────
	let dosingCrclMlMin: number | null = null;
	let dosingBasis: DosingBasis = 'none';
	if (renalReplacement !== null) dosingBasis = 'renal-replacement';
	else if (crclMlMin !== null) {
		if (stable) {
			dosingCrclMlMin = crclMlMin;
			dosingBasis = 'cockcroft-gault';
		} else if (kineticGfrMlMin !== null) {
			dosingCrclMlMin = Math.min(crclMlMin, kineticGfrMlMin);
			dosingBasis = 'lower-of-cg-and-kinetic-gfr';
		} else {
			// kinetics are still shown on Cockcroft–Gault, but no regimen is proposed from it
			dosingCrclMlMin = crclMlMin;
			dosingBasis = 'unstable-no-kinetic-gfr';
		}
	}
	trace.push(
		step(
			'dosingCrcl',
			'Renal function used for dosing',
			dosingCrclMlMin,
			'mL/min',
			'Cockcroft–Gault while creatinine is stable; the lower of Cockcroft–Gault and kinetic GFR while it changes; none on renal replacement therapy',
			[
				input('Cockcroft–Gault', crclMlMin, 'mL/min', 'step crcl'),
				input('kinetic GFR', kineticGfrMlMin, 'mL/min', 'step kineticGfr'),
				input('creatinine stable', stable, '', 'step creatinineStable')
			],
			SOURCES.commonPractice,
			DOSING_BASIS_NOTE[dosingBasis]
		)
	);

	return {
		latestMgDl,
		latestAtMs,
		ageH,
		fresh,
		scan,
		kdigoStage,
		stable,
		crclMlMin,
		egfrIndexed,
		egfrMlMin,
		kineticGfrMlMin,
		arc,
		renalReplacement,
		dosingCrclMlMin,
		dosingBasis,
		missing,
		trace
	};
}

export const DOSING_BASIS_NOTE: Record<DosingBasis, string | undefined> = {
	'cockcroft-gault': undefined,
	'lower-of-cg-and-kinetic-gfr': 'creatinine is changing: doses follow the lower of Cockcroft–Gault and kinetic GFR until it settles',
	'unstable-no-kinetic-gfr': 'creatinine is changing and kinetic GFR cannot be computed (results too close together): no regimen is proposed',
	'renal-replacement': 'on renal replacement therapy: the agent’s regimen for it applies, not a CrCl band',
	none: 'no current creatinine or no weight: no renal function for dosing'
};
