// assess() on invented patients. Expected numbers are worked out by hand from clinical-reference formulas
// (shown in the comments; independent of the code under test) and checked to 0.5 %.
import { describe, expect, it } from 'vitest';
import { assess, PROPOSAL_CAUTION, type AgentParams, type AssessInput } from '../../../src/lib/clinical';
import agentsFile from '../../../fixtures/agents.json';
import { expectClose } from './helpers';

const agents = agentsFile.agents as unknown as AgentParams[];
const agent = (name: string) => {
	const a = agents.find((x) => x.name === name);
	if (!a) throw new Error(`fixture agent ${name} missing`);
	return a;
};

const at = new Date('2025-03-10T08:00:00Z');
const hoursBefore = (h: number) => new Date(at.getTime() - h * 3_600_000);
const mg = (value: number) => ({ value, unit: 'mg/dL' as const });

describe('AKI onset on gentamicin (male, 70 y, 180 cm, 78 kg)', () => {
	const input: AssessInput = {
		at,
		patient: { ageYears: 70, sex: 'male', heights: [{ at: hoursBefore(200), cm: 180 }], weights: [{ at: hoursBefore(200), kg: 78 }] },
		creatinine: [
			{ at: hoursBefore(72), creatinine: mg(0.9) },
			{ at: hoursBefore(24), creatinine: mg(1.3) },
			{ at: hoursBefore(2), creatinine: mg(2.0) }
		],
		albumin: [{ at: hoursBefore(10), gL: 38 }],
		agent: agent('Gentamicin'),
		order: { doseMg: 450, intervalH: 24, infusionH: 0.5, route: 'iv', startAt: hoursBefore(60) }
	};
	const a = assess(input);

	it('body size: IBW 74.99 kg (Devine), dosing weight = IBW because TBW ≤ 1.2 × IBW', () => {
		// IBW = 50 + 2.3 × (180/2.54 − 60) = 50 + 2.3 × 10.866 = 74.992 kg; AdjBW = 74.992 + 0.4 × 3.008 = 76.195
		// BSA (Mosteller) = sqrt(180 × 78 / 3600) = 1.9748 m²
		expectClose(a.covariates.idealBodyWeightKg!, 74.992);
		expectClose(a.covariates.adjustedBodyWeightKg!, 76.195);
		expectClose(a.covariates.dosingWeightKg!, 74.992);
		expect(a.covariates.weightBasis).toBe('ideal');
		expectClose(a.covariates.bsaM2!, 1.9748);
	});

	it('KDIGO stage 2, unstable: baseline 0.9 (lowest in 7 d), current 2.0 (× 2.22), largest 48-h rise 0.7', () => {
		// KDIGO 2012: 2.0 / 0.9 = 2.22 → stage 2; 48-h pairs: 0.9→1.3 (exactly 48 h) = 0.4, 1.3→2.0 = 0.7
		expect(a.renal.kdigoStage).toBe(2);
		expect(a.creatinine.stable).toBe(false);
		expectClose(a.creatinine.baselineMgDl!, 0.9);
		expectClose(a.creatinine.riseWithin48hMgDl!, 0.7);
		expectClose(a.creatinine.ageH!, 2);
	});

	it('CrCl 36.5 now vs 81.0 at the start; eGFR 35.2 (= A09) de-indexed 40.2', () => {
		// CG = 70 × 74.992 / (72 × 2.0) = 36.455; at start (SCr 0.9, 12 h before start) = 70 × 74.992 / 64.8 = 81.010
		// CKD-EPI 2021 male 70 y SCr 2.0 = 35.24 (clinical-reference A09); × 1.9748 / 1.73 = 40.23
		expectClose(a.renal.crclMlMin!, 36.455);
		expectClose(a.renal.crclAtStartMlMin!, 81.01);
		expectClose(a.renal.egfrIndexed!, 35.24);
		expectClose(a.renal.egfrMlMin!, 40.23);
		expect(a.renal.arc).toBe(false);
	});

	it('kinetic GFR 29.1 mL/min (Chen 2013)', () => {
		// SSPCr 0.9, CrCl_ss 81.01; MaxΔPCr/d = 0.9 × 81.01 × 1440/100 / (0.6 × 78 × 10) = 2.2434;
		// KeGFR = 0.9 × 81.01 / 1.65 × (1 − 24 × 0.7 / (22 × 2.2434)) = 29.146
		expectClose(a.renal.kineticGfrMlMin!, 29.146);
	});

	it('creatinine rising: doses follow the lower of Cockcroft–Gault (36.5) and kinetic GFR (29.1)', () => {
		// common practice (issue "Safe proposals"): Cockcroft–Gault assumes a steady state, so while creatinine
		// rises the kinetic GFR (Chen S, J Am Soc Nephrol 2013;24:877–888) is the better, lower estimate
		expectClose(a.renal.dosingCrclMlMin!, 29.146);
		expect(a.renal.dosingBasis).toBe('lower-of-cg-and-kinetic-gfr');
	});

	it('aminoglycoside model at the dosing CrCl: t½ 6.97 h now vs 2.76 h at start (ratio 2.53)', () => {
		// Vd = 0.26 × 74.992 = 19.498 L; k = 0.00293 × 29.146 + 0.014 = 0.099398 /h; t½ = 6.9735 h; CL = 1.9380 L/h
		// at start k = 0.00293 × 81.01 + 0.014 = 0.25136 /h, t½ = 2.7576 h
		const now = a.kinetics.now!;
		expectClose(now.volumeL, 19.498);
		expectClose(now.kPerH, 0.099398);
		expectClose(now.halfLifeH, 6.9735);
		expectClose(now.clearanceLPerH, 1.93805);
		expectClose(a.kinetics.atStart!.halfLifeH, 2.7576);
		expectClose(a.kinetics.halfLifeRatio!, 2.5288);
		// albumin plays no part for a drug bound < 70 %: the renal-only ratio is the same
		expectClose(a.kinetics.halfLifeRatioRenal!, 2.5288);
	});

	it('predicted steady state of 450 mg q24h: peak 24.8, trough 2.40 mg/L (above the 1 mg/L limit), AUC24 232', () => {
		// Sawchuk–Zaske steady state with k 0.099398, Vd 19.498, tinf 0.5 h, τ 24 h; AUC24 = 450 / 1.93805
		expectClose(a.kinetics.peakMgL!, 24.798);
		expectClose(a.kinetics.troughMgL!, 2.3986);
		expectClose(a.kinetics.auc24MgHL!, 232.19);
	});

	it('band 20–39 → 6 mg/kg q48h: order is above; proposal 440 mg q48h, no loading dose on a running order', () => {
		// band daily dose = 6 × 74.992 / 2 = 224.98 mg; order 450 mg/d (× 2.0) → above
		// 449.95 mg → 440 mg (20-mg step, common practice) q48h: predicted trough 0.198 mg/L < 1 mg/L
		// extended-interval dosing has no separate loading dose, and the order is on its third dose
		expectClose(a.dosing.bandDailyDoseMg!, 224.98);
		expect(a.dosing.referenceLabel).toBe('CrCl 20–39 mL/min');
		expect(a.dosing.comparedToBand).toBe('above');
		expect(a.dosing.proposed).toMatchObject({ doseMg: 440, intervalH: 48, infusionH: 0.5, loadingDoseMg: null });
		expectClose(a.dosing.proposed!.predicted!.troughMgL!, 0.19767);
		expect(a.dosing.proposed!.basis).toContain('renal band CrCl 20–39 mL/min');
		expect(a.dosing.cautions!.join(' ')).toContain('kinetic GFR');
	});

	it('complete, with a trace that names its sources and carries the caution', () => {
		// albumin 38 g/L, fu_ref 0.95 → fu = 1 / (1 + (0.05/0.95) × 38/40) = 0.95238
		expect(a.complete).toBe(true);
		expect(a.missing).toEqual([]);
		expectClose(a.albumin.unboundFraction!, 0.95238);
		const keys = a.trace.map((s) => s.key);
		for (const key of [
			'age',
			'ibw',
			'dosingWeight',
			'creatinine',
			'kdigo',
			'crcl',
			'egfr',
			'kineticGfr',
			'dosingCrcl',
			'kNow',
			'halfLifeNow',
			'peak',
			'trough',
			'auc24',
			'band',
			'proposed'
		]) {
			expect(keys).toContain(key);
		}
		expect(keys.indexOf('crcl')).toBeLessThan(keys.indexOf('kNow'));
		expect(keys.indexOf('kNow')).toBeLessThan(keys.indexOf('proposed'));
		const crcl = a.trace.find((s) => s.key === 'crcl')!;
		expect(crcl.source).toContain('Cockcroft DW, Gault MH');
		expect(crcl.inputs.map((i) => i.name)).toEqual(['age', 'weight', 'SCr', 'sex']);
		expect(a.trace.find((s) => s.key === 'kineticGfr')!.source).toContain('Chen S');
		expect(a.trace.find((s) => s.key === 'proposed')!.note).toBe(PROPOSAL_CAUTION);
		for (const s of a.trace) expect(s.source.length).toBeGreaterThan(0);
	});
});

describe('recovery on meropenem (female, born 1950-06-15, 160 cm, 55 kg)', () => {
	const a = assess({
		at,
		patient: {
			birthDate: new Date('1950-06-15T00:00:00Z'),
			sex: 'female',
			heights: [{ at: hoursBefore(300), cm: 160 }],
			weights: [{ at: hoursBefore(300), kg: 55 }]
		},
		creatinine: [
			{ at: hoursBefore(3), creatinine: mg(0.9) }, // deliberately unsorted
			{ at: hoursBefore(120), creatinine: mg(2.4) },
			{ at: hoursBefore(72), creatinine: mg(1.8) },
			{ at: hoursBefore(24), creatinine: mg(1.2) }
		],
		albumin: [],
		agent: agent('Meropenem'),
		order: { doseMg: 500, intervalH: 12, infusionH: 0.5, route: 'iv', startAt: hoursBefore(100) }
	});

	it('age 74 from the birth date (birthday not yet reached in March)', () => {
		expect(a.covariates.ageYears).toBe(74);
	});

	it('falling creatinine: KDIGO 0 but unstable (fall of 0.6 within 48 h)', () => {
		// baseline = lowest in 7 d = current 0.9 → ratio 1; no rise; falls 2.4→1.8 and 1.8→1.2 within 48 h
		expect(a.renal.kdigoStage).toBe(0);
		expect(a.creatinine.stable).toBe(false);
		expectClose(a.creatinine.latestMgDl!, 0.9);
		expect(a.creatinine.riseWithin48hMgDl).toBe(0);
	});

	it('CrCl 45.3 now vs 17.0 at the start; meropenem t½ 1.62 h now vs 2.39 h (ratio 0.679)', () => {
		// IBW = 45.5 + 2.3 × (160/2.54 − 60) = 52.382 kg (dosing weight, TBW ≤ 1.2 × IBW)
		// CG = 66 × 52.382 / (72 × 0.9) × 0.85 = 45.349; at start SCr 2.4 → 17.006
		// Vd = 0.3 × 52.382 = 15.715 L; CL_normal = ln2 × 15.715 / 1 h = 10.893 L/h
		// Q = 1 − 0.7 × (1 − 0.45349) = 0.61744 → CL 6.7255 L/h, t½ = 1 / 0.61744 = 1.6196 h
		// Q at start = 1 − 0.7 × (1 − 0.17006) = 0.41904 → t½ 2.3864 h
		expectClose(a.renal.crclMlMin!, 45.349);
		expectClose(a.renal.crclAtStartMlMin!, 17.006);
		expectClose(a.kinetics.now!.volumeL, 15.715);
		expectClose(a.kinetics.now!.clearanceLPerH, 6.7255);
		expectClose(a.kinetics.now!.halfLifeH, 1.6196);
		expectClose(a.kinetics.atStart!.halfLifeH, 2.3864);
		expectClose(a.kinetics.halfLifeRatio!, 0.67867);
		expectClose(a.kinetics.auc24MgHL!, 148.69);
	});

	it('kinetic GFR during recovery 46.4 mL/min', () => {
		// SSPCr 0.9 (lowest), CrCl_ss 45.349, MaxΔ = 0.9 × 45.349 × 2.4 / 55 = 1.7810 mg/dL/d
		// KeGFR = 0.9 × 45.349 / 1.05 × (1 + 24 × 0.3 / (21 × 1.7810)) = 46.354
		expectClose(a.renal.kineticGfrMlMin!, 46.354);
	});

	it('band 26–50 → 1 g q12h: the reduced order (500 mg q12h) is now below; proposal 1000 mg q12h', () => {
		expect(a.dosing.dailyDoseMg).toBe(1000);
		expect(a.dosing.bandDailyDoseMg).toBe(2000);
		expect(a.dosing.comparedToBand).toBe('below');
		expect(a.dosing.proposed).toMatchObject({ doseMg: 1000, intervalH: 12, loadingDoseMg: null });
	});

	it('no albumin result: incomplete, only the unbound fraction is null (meropenem is not highly bound)', () => {
		expect(a.complete).toBe(false);
		expect(a.missing).toEqual(['albumin']);
		expect(a.albumin.unboundFraction).toBeNull();
		expectClose(a.albumin.unboundFractionRef, 0.98);
		expect(a.kinetics.now).not.toBeNull();
	});
});

describe('obesity on vancomycin (male, 40 y, 175 cm, 120 kg — the A06 patient)', () => {
	const a = assess({
		at,
		patient: { ageYears: 40, sex: 'male', heights: [{ at: hoursBefore(100), cm: 175 }], weights: [{ at: hoursBefore(100), kg: 120 }] },
		creatinine: [
			{ at: hoursBefore(50), creatinine: mg(1.0) },
			{ at: hoursBefore(4), creatinine: mg(1.0) }
		],
		albumin: [{ at: hoursBefore(20), gL: 40 }],
		agent: agent('Vancomycin'),
		order: { doseMg: 2000, intervalH: 12, infusionH: 2, route: 'iv', startAt: hoursBefore(30) }
	});

	it('CG on adjusted weight 90.28 kg → 125.4 mL/min (not ARC); stable', () => {
		// A06: IBW 70.465, AdjBW = 70.465 + 0.4 × 49.535 = 90.279; CrCl = 100 × 90.279 / 72 = 125.39
		expect(a.covariates.weightBasis).toBe('adjusted');
		expectClose(a.covariates.dosingWeightKg!, 90.279);
		expectClose(a.renal.crclMlMin!, 125.39);
		expect(a.renal.arc).toBe(false);
		expect(a.creatinine.stable).toBe(true);
		expect(a.renal.kineticGfrMlMin).toBeNull();
	});

	it('Matzke CL 5.40 L/h, Vd on actual weight 84 L, t½ 10.8 h; AUC24 740 (above the 400–600 target)', () => {
		// CL = (3.66 + 0.689 × 125.39) × 0.06 = 5.4031 L/h; Vd = 0.7 × 120 = 84 L; k = 0.064323; t½ = 10.776 h
		// AUC24 = 4000 / 5.4031 = 740.3; F12 peak 41.54, trough 21.83 mg/L (tinf 2 h, τ 12 h)
		expectClose(a.kinetics.now!.clearanceLPerH, 5.4031);
		expectClose(a.kinetics.now!.volumeL, 84);
		expectClose(a.kinetics.now!.halfLifeH, 10.776);
		expectClose(a.kinetics.auc24MgHL!, 740.32);
		expectClose(a.kinetics.peakMgL!, 41.539);
		expectClose(a.kinetics.troughMgL!, 21.832);
	});

	it('AUC-guided at every CrCl: 1250 mg q12h (AUC24 463), infused over 2.5 h; no loading dose on a running order', () => {
		// Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864: AUC24 400–600; no fixed mg/kg band.
		// CL 5.4031 L/h: 12-h interval (500 mg/day grid ≤ 0.75 × 200 × 5.4031 = 810); aim 425 × 5.4031 = 2296 → 2500 mg/day
		// → 1250 mg q12h, AUC24 = 2500 / 5.4031 = 462.7; 1250 mg at ≤ 10 mg/min (product information) = 2.08 h → 2.5 h
		// the order is on its third dose: a loading dose belongs to the start of therapy only
		expect(a.dosing.referenceLabel).toBe('CrCl ≥ 20 mL/min');
		expect(a.dosing.comparedToBand).toBe('unknown');
		expect(a.dosing.proposed).toMatchObject({ doseMg: 1250, intervalH: 12, infusionH: 2.5, loadingDoseMg: null });
		expectClose(a.dosing.proposed!.predicted!.auc24MgHL!, 462.69);
		expectClose(a.dosing.proposed!.predicted!.troughMgL!, 13.871);
		expect(a.complete).toBe(true);
		expect(a.dosing.cautions!.join(' ')).toContain('adjusted body weight');
	});
});

describe('low albumin with a highly bound agent: ceftriaxone (female, 50 y, 165 cm, 60 kg)', () => {
	const a = assess({
		at,
		patient: { ageYears: 50, sex: 'female', heights: [{ at: hoursBefore(100), cm: 165 }], weights: [{ at: hoursBefore(100), kg: 60 }] },
		creatinine: [
			{ at: hoursBefore(50), creatinine: mg(0.8) },
			{ at: hoursBefore(30), creatinine: mg(0.8) },
			{ at: hoursBefore(3), creatinine: mg(0.8) }
		],
		albumin: [
			{ at: hoursBefore(50), gL: 36 },
			{ at: hoursBefore(6), gL: 20 }
		],
		agent: agent('Ceftriaxone'),
		order: { doseMg: 2000, intervalH: 24, infusionH: 0.5, route: 'iv', startAt: hoursBefore(48) }
	});

	it('unbound fraction 0.182 at 20 g/L (F16, fu_ref 0.10 at 40 g/L)', () => {
		// fu = 1 / (1 + 9 × 20/40) = 0.18182
		expectClose(a.albumin.unboundFraction!, 0.18182);
		expectClose(a.albumin.unboundFractionRef, 0.1);
	});

	it('albumin model: CL 1.236 L/h (× 1.82 of the binding-sensitive part), Vd 9.68 L (+19 %), t½ 5.43 h', () => {
		// CrCl = 90 × 56.909 / 57.6 × 0.85 = 75.583; Vd_ref = 0.135 × 60 = 8.1 L; CL_normal = ln2 × 8.1 / 7.25 = 0.77441
		// Q = 1 − 0.5 × (1 − 0.75583) = 0.87791 → CL_ref 0.67987 L/h; renal 0.29266 ≤ fu_ref × CrCl × 0.06 = 0.4535 → all filtered
		// CL = (0.29266 + 0.38721) × 1.8182 = 1.2361 L/h
		// Øie–Tozer per 60 kg: Vp(1+R) = 3/70 × 2.4 × 60 = 6.1714; Ve − R·Vp = 7.8/70 × 60 = 6.6857; tissue = 8.1 − 6.1714 − 0.66857 = 1.26
		// Vd = 6.1714 + 6.6857 × 0.18182 + 1.26 × 1.8182 = 9.6779 L; t½ = ln2 × 9.6779 / 1.2361 = 5.4268 h
		expectClose(a.kinetics.now!.clearanceLPerH, 1.2361);
		expectClose(a.kinetics.now!.volumeL, 9.6779);
		expectClose(a.kinetics.now!.halfLifeH, 5.4268);
		const volumeRise = a.kinetics.now!.volumeL / 8.1;
		expect(volumeRise).toBeLessThan(a.albumin.unboundFraction! / 0.1); // less than proportional to fu
	});

	it('at the start (albumin 36 g/L): t½ 7.69 h, so t½ now / start = 0.706; total AUC24 1618', () => {
		// fu(36) = 1 / (1 + 9 × 0.9) = 0.10989; CL = 0.67987 × 1.0989 = 0.74711; Vd = 6.1714 + 6.6857 × 0.10989 + 1.26 × 1.0989 = 8.2907
		// t½ = ln2 × 8.2907 / 0.74711 = 7.6919; AUC24 = 2000 / 1.2361 = 1618.0
		expectClose(a.kinetics.atStart!.halfLifeH, 7.6919);
		expectClose(a.kinetics.halfLifeRatio!, 0.70552);
		expectClose(a.kinetics.auc24MgHL!, 1617.96);
	});

	it('trace explains the albumin model, its sources and the counterpoint; no dose increase is proposed', () => {
		const s = a.trace.find((x) => x.key === 'albuminAdjustment')!;
		expectClose(s.value as number, 1.8182);
		expect(s.source).toContain('Øie S, Tozer TN');
		expect(s.source).toContain('Antibiotics 2023;12:515');
		expect(s.note).toContain('no automatic dose increase');
		expect(a.dosing.comparedToBand).toBe('within');
		expect(a.dosing.proposed).toMatchObject({ doseMg: 2000, intervalH: 24 });
		expect(a.complete).toBe(true);
	});
});

describe('missing and stale inputs give complete: false and null dependants, never defaults', () => {
	it('no height, stale creatinine, no albumin (vancomycin, creatinine limit 48 h)', () => {
		const a = assess({
			at,
			patient: { ageYears: 60, sex: 'male', heights: [], weights: [{ at: hoursBefore(10), kg: 90 }] },
			creatinine: [{ at: hoursBefore(100), creatinine: mg(1.1) }],
			albumin: [],
			agent: agent('Vancomycin'),
			order: { doseMg: 1500, intervalH: 12, infusionH: 1.5, route: 'iv', startAt: hoursBefore(20) }
		});
		expect(a.complete).toBe(false);
		expect(a.missing).toEqual(['height', 'creatinine older than 48 h', 'albumin', 'creatinine at order start']);
		// no height: actual weight stands in, said in the trace
		expect(a.covariates.idealBodyWeightKg).toBeNull();
		expect(a.covariates.adjustedBodyWeightKg).toBeNull();
		expect(a.covariates.bsaM2).toBeNull();
		expect(a.covariates.dosingWeightKg).toBe(90);
		expect(a.covariates.weightBasis).toBe('actual');
		expect(a.trace.find((s) => s.key === 'dosingWeight')!.note).toContain('no height');
		// stale creatinine is reported but not used
		expectClose(a.creatinine.latestMgDl!, 1.1);
		expectClose(a.creatinine.ageH!, 100);
		expect(a.renal.crclMlMin).toBeNull();
		expect(a.renal.egfrIndexed).toBeNull();
		expect(a.renal.crclAtStartMlMin).toBeNull();
		expect(a.kinetics).toEqual({ now: null, atStart: null, halfLifeRatio: null, halfLifeRatioRenal: null, peakMgL: null, troughMgL: null, auc24MgHL: null });
		expect(a.dosing.comparedToBand).toBe('unknown');
		expect(a.dosing.proposed).toBeNull();
		expect(a.albumin.unboundFraction).toBeNull();
	});

	it('no creatinine at all: "creatinine" listed once, stage 0 but not called stable', () => {
		const a = assess({
			at,
			patient: { ageYears: 60, sex: 'female', heights: [{ at: hoursBefore(10), cm: 170 }], weights: [{ at: hoursBefore(10), kg: 70 }] },
			creatinine: [],
			albumin: [{ at: hoursBefore(10), gL: 35 }],
			agent: agent('Cefepime'),
			order: { doseMg: 2000, intervalH: 8, infusionH: 0.5, route: 'iv', startAt: hoursBefore(20) }
		});
		expect(a.missing).toEqual(['creatinine']);
		expect(a.renal.kdigoStage).toBe(0);
		expect(a.creatinine.stable).toBe(false);
		expect(a.renal.crclMlMin).toBeNull();
		expect(a.kinetics.now).toBeNull();
	});

	it('highly bound agent without albumin: kinetics null, the renal band proposal still stands', () => {
		const a = assess({
			at,
			patient: { ageYears: 60, sex: 'male', heights: [{ at: hoursBefore(10), cm: 180 }], weights: [{ at: hoursBefore(10), kg: 80 }] },
			creatinine: [{ at: hoursBefore(5), creatinine: mg(1.0) }],
			albumin: [],
			agent: agent('Daptomycin'),
			order: { doseMg: 400, intervalH: 24, infusionH: 0.5, route: 'iv', startAt: hoursBefore(20) }
		});
		expect(a.missing).toEqual(['albumin']);
		expect(a.kinetics.now).toBeNull();
		expect(a.trace.find((s) => s.key === 'albuminAdjustment')!.note).toContain('without a current albumin');
		// dosing weight IBW 74.992 (TBW 80 ≤ 1.2 × IBW): CG = 80 × 74.992 / 72 = 83.325 → band ≥ 30: 5 mg/kg × 80 kg (TBW basis) = 400 mg q24h
		expectClose(a.renal.crclMlMin!, 83.325);
		expect(a.dosing.proposed).toMatchObject({ doseMg: 400, intervalH: 24 });
	});
});

describe('other situations', () => {
	it('rise of 0.35 mg/dL in 24 h with ratio 1.35 → KDIGO 1, unstable (the A23 situation in a record)', () => {
		const a = assess({
			at,
			patient: { ageYears: 55, sex: 'male', heights: [{ at: hoursBefore(10), cm: 175 }], weights: [{ at: hoursBefore(10), kg: 70 }] },
			creatinine: [
				{ at: hoursBefore(26), creatinine: mg(1.0) },
				{ at: hoursBefore(2), creatinine: mg(1.35) }
			],
			albumin: [{ at: hoursBefore(10), gL: 40 }],
			agent: agent('Piperacillin–tazobactam'),
			order: { doseMg: 4500, intervalH: 6, infusionH: 0.5, route: 'iv', startAt: hoursBefore(30) }
		});
		expect(a.renal.kdigoStage).toBe(1);
		expect(a.creatinine.stable).toBe(false);
		expect(a.renal.kineticGfrMlMin).not.toBeNull();
	});

	it('possible ARC (male 25 y, SCr 0.6): CrCl 199.6, meropenem Q not capped → t½ 0.589 h', () => {
		// CG = 115 × 74.992 / (72 × 0.6) = 199.63; Q = 1 − 0.7 × (1 − 1.9963) = 1.6974; t½ = 1 h / 1.6974 = 0.58913 h
		const a = assess({
			at,
			patient: { ageYears: 25, sex: 'male', heights: [{ at: hoursBefore(10), cm: 180 }], weights: [{ at: hoursBefore(10), kg: 80 }] },
			creatinine: [{ at: hoursBefore(5), creatinine: mg(0.6) }],
			albumin: [{ at: hoursBefore(5), gL: 42 }],
			agent: agent('Meropenem'),
			order: { doseMg: 1000, intervalH: 8, infusionH: 0.5, route: 'iv', startAt: hoursBefore(20) }
		});
		expectClose(a.renal.crclMlMin!, 199.63);
		expect(a.renal.arc).toBe(true);
		expectClose(a.kinetics.now!.halfLifeH, 0.58913);
		expect(a.trace.find((s) => s.key === 'renalFactor')!.note).toContain('ARC');
		expect(a.dosing.proposed).toMatchObject({ doseMg: 1000, intervalH: 8 });
	});

	it('vancomycin at CrCl 36.5: 750 mg q24h for an AUC24 of 434; a loading dose of 1750 mg only while the order is new', () => {
		// CrCl 36.455 (as the gentamicin patient); CL = (3.66 + 0.689 × 36.455) × 0.06 = 1.7266 L/h; Vd = 0.7 × 78 = 54.6 L
		// 12-h grid 500 mg/day > 0.75 × 200 × 1.7266 = 259 → 24 h (250 mg/day); aim 425 × 1.7266 = 733.8 → 750 mg/day
		// AUC24 = 750 / 1.7266 = 434.4 (inside 400–600, Rybak 2020)
		// LD = 54.6 × 25 = 1365 mg, below 20 mg/kg × 78 = 1560 (Rybak 2020: 20–35 mg/kg, at most 3,000 mg) → 1750 (250-mg step)
		const input: AssessInput = {
			at,
			patient: { ageYears: 70, sex: 'male', heights: [{ at: hoursBefore(200), cm: 180 }], weights: [{ at: hoursBefore(200), kg: 78 }] },
			creatinine: [
				{ at: hoursBefore(40), creatinine: mg(2.0) },
				{ at: hoursBefore(2), creatinine: mg(2.0) }
			],
			albumin: [{ at: hoursBefore(10), gL: 38 }],
			agent: agent('Vancomycin'),
			order: { doseMg: 1250, intervalH: 12, infusionH: 1.5, route: 'iv', startAt: hoursBefore(30) }
		};
		const running = assess(input);
		expectClose(running.kinetics.now!.halfLifeH, 21.919);
		expect(running.dosing.comparedToBand).toBe('unknown');
		expect(running.dosing.proposed).toMatchObject({ doseMg: 750, intervalH: 24, infusionH: 1.5, loadingDoseMg: null });
		expectClose(running.dosing.proposed!.predicted!.auc24MgHL!, 434.39);
		expect(running.dosing.proposed!.basis).toContain('AUC24 target');
		// a new order of 750 mg q24h: before its second dose, predicted exposure inside the target → loading dose to consider
		const fresh = assess({ ...input, order: { ...input.order, doseMg: 750, intervalH: 24, startAt: hoursBefore(2) } });
		expect(fresh.therapy!.newOrder).toBe(true);
		expect(fresh.dosing.proposed).toMatchObject({ doseMg: 750, intervalH: 24, loadingDoseMg: 1750 });
		// the same new order at 1250 mg q12h already predicts AUC24 1448 (> 600): no loading dose on top of it
		const high = assess({ ...input, order: { ...input.order, startAt: hoursBefore(2) } });
		expect(high.dosing.proposed!.loadingDoseMg).toBeNull();
	});

	it('no band below 10 mL/min for levofloxacin: no proposal, and the reason says there is no regimen for this renal function', () => {
		// female 80 y, 160 cm, 50 kg (< IBW 52.38 → actual), SCr 4.0: CG = 60 × 50 / 288 × 0.85 = 8.854
		// the library's bands stop at 10 mL/min (levofloxacin product information, from memory): nothing to propose from
		const a = assess({
			at,
			patient: { ageYears: 80, sex: 'female', heights: [{ at: hoursBefore(10), cm: 160 }], weights: [{ at: hoursBefore(10), kg: 50 }] },
			creatinine: [{ at: hoursBefore(5), creatinine: mg(4.0) }],
			albumin: [{ at: hoursBefore(5), gL: 30 }],
			agent: agent('Levofloxacin'),
			order: { doseMg: 750, intervalH: 48, infusionH: 1.5, route: 'iv', startAt: hoursBefore(20) }
		});
		expectClose(a.renal.crclMlMin!, 8.8542);
		expect(a.dosing.proposed).toBeNull();
		expect(a.dosing.noRegimenReason).toBe('no regimen for this renal function in the library');
		expect(a.dosing.proposalReason).toContain('no regimen for this renal function');
		expectClose(a.trace.find((s) => s.key === 'renalFactor')!.value as number, 0.20703);
	});

	it('band marked "not recommended" (TMP–SMX below 15 mL/min): no proposal, the reason in the trace', () => {
		const a = assess({
			at,
			patient: { ageYears: 80, sex: 'female', heights: [{ at: hoursBefore(10), cm: 160 }], weights: [{ at: hoursBefore(10), kg: 50 }] },
			creatinine: [{ at: hoursBefore(5), creatinine: mg(4.0) }],
			albumin: [{ at: hoursBefore(5), gL: 30 }],
			agent: agent('Trimethoprim–sulfamethoxazole'),
			order: { doseMg: 160, intervalH: 12, infusionH: 1, route: 'po', startAt: hoursBefore(20) }
		});
		expect(a.dosing.proposed).toBeNull();
		expect(a.trace.find((s) => s.key === 'proposed')!.note).toContain('not recommended');
		// oral route: no peak/trough (absorption not modelled) but AUC24 with F = 0.9
		expect(a.kinetics.peakMgL).toBeNull();
		expectClose(a.kinetics.auc24MgHL!, (0.9 * 320) / a.kinetics.now!.clearanceLPerH, 1e-12);
	});

	it('results after the assessment time are ignored', () => {
		const base: AssessInput = {
			at,
			patient: { ageYears: 60, sex: 'male', heights: [{ at: hoursBefore(10), cm: 180 }], weights: [{ at: hoursBefore(10), kg: 80 }] },
			creatinine: [{ at: hoursBefore(5), creatinine: mg(1.0) }],
			albumin: [{ at: hoursBefore(5), gL: 40 }],
			agent: agent('Cefepime'),
			order: { doseMg: 2000, intervalH: 8, infusionH: 0.5, route: 'iv', startAt: hoursBefore(20) }
		};
		const later = new Date(at.getTime() + 3_600_000);
		const withFuture = assess({
			...base,
			creatinine: [...base.creatinine, { at: later, creatinine: mg(3.0) }],
			patient: { ...base.patient, weights: [...base.patient.weights, { at: later, kg: 120 }] }
		});
		const plain = assess(base);
		expect(withFuture.renal.crclMlMin).toBe(plain.renal.crclMlMin);
		expect(withFuture.covariates.weightKg).toBe(80);
	});
});
