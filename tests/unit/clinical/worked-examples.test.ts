// Worked check values A01–A26 of clinical-reference §6A. Tolerance: relative 0.5 % for continuous outputs,
// exact for stages and flags. Each check names the primary citation and its tag from the reference.
import { describe, expect, it } from 'vitest';
import {
	accumulationFactor,
	aminoglycosideK,
	augmentedRenalClearance,
	bsaDuBois,
	bsaMosteller,
	ckdEpi2021,
	cockcroftGault,
	creatinineUmolL,
	deindexEgfr,
	dosingWeight,
	idealBodyWeight,
	kdigoStage,
	loadingDose,
	maintenanceRate,
	mdrd175,
	oneCompartment,
	peakAfterDoses,
	renalAdjustmentFactor,
	steadyStateInfusion,
	unboundFraction,
	vancomycinPopulation
} from '../../../src/lib/clinical';
import { expectClose } from './helpers';

const mg = (value: number) => ({ value, unit: 'mg/dL' as const });
const umol = (value: number) => ({ value, unit: 'umol/L' as const });

describe('Cockcroft–Gault (F4)', () => {
	it('A01: 65 y, 70 kg, 1.4 mg/dL, male → 52.1 mL/min', () => {
		// Cockcroft & Gault, Nephron 1976;16:31–41 (S) — worked figure 52.1 matches public examples
		expectClose(cockcroftGault({ ageYears: 65, sex: 'male', weightKg: 70, creatinine: mg(1.4) }), 52.1);
	});
	it('A02: 45 y, 60 kg, 0.9 mg/dL, female → 74.8 mL/min', () => {
		// Cockcroft & Gault, Nephron 1976;16:31–41 (S) — worked figure 74.8 matches public examples
		expectClose(cockcroftGault({ ageYears: 45, sex: 'female', weightKg: 60, creatinine: mg(0.9) }), 74.8);
	});
	it('A03: 50 y, 80 kg, 100 µmol/L, male → 88.4 mL/min (µmol/L converted first, F1)', () => {
		// Cockcroft & Gault, Nephron 1976;16:31–41 (S); conversion ÷ 88.4 (clinical-reference §1, S)
		expectClose(cockcroftGault({ ageYears: 50, sex: 'male', weightKg: 80, creatinine: umol(100) }), 88.4);
	});
});

describe('Devine ideal body weight (F2)', () => {
	it('A04: 177.8 cm male → 73.0 kg', () => {
		// Devine BJ, Drug Intell Clin Pharm 1974;8:650–655 (S) — equals public Devine examples
		expectClose(idealBodyWeight({ heightCm: 177.8, sex: 'male' }), 73.0);
	});
	it('A05: 167.64 cm female → 59.3 kg', () => {
		// Devine BJ, Drug Intell Clin Pharm 1974;8:650–655 (S) — equals public Devine examples
		expectClose(idealBodyWeight({ heightCm: 167.64, sex: 'female' }), 59.3);
	});
});

describe('Cockcroft–Gault with weight selection (F2–F4)', () => {
	it('A06: 40 y, 175 cm, 120 kg, 1.0 mg/dL, male, ratio 1.2 → IBW 70.5, AdjBW 90.3, CrCl 125', () => {
		// Devine 1974 (S); adjusted weight factor 0.4 (S/CP); Cockcroft & Gault 1976 (S); weight choice CP
		const w = dosingWeight({ heightCm: 175, sex: 'male', weightKg: 120, obeseRatio: 1.2 });
		expectClose(w.idealKg, 70.5);
		expect(w.basis).toBe('adjusted');
		expectClose(w.weightKg, 90.3);
		expectClose(cockcroftGault({ ageYears: 40, sex: 'male', weightKg: w.weightKg, creatinine: mg(1.0) }), 125);
	});
});

describe('CKD-EPI 2021 (F5)', () => {
	it('A07: 55 y female, 0.9 mg/dL → 75.5', () => {
		// Inker LA et al., N Engl J Med 2021;385:1737–1749 (S) — agrees with a public worked example ("about 76")
		expectClose(ckdEpi2021({ ageYears: 55, sex: 'female', creatinine: mg(0.9) }), 75.5);
	});
	it('A08: 50 y male, 1.0 mg/dL → 91.7', () => {
		// Inker LA et al., N Engl J Med 2021;385:1737–1749 (S)
		expectClose(ckdEpi2021({ ageYears: 50, sex: 'male', creatinine: mg(1.0) }), 91.7);
	});
	it('A09: 70 y male, 2.0 mg/dL → 35.2', () => {
		// Inker LA et al., N Engl J Med 2021;385:1737–1749 (S)
		expectClose(ckdEpi2021({ ageYears: 70, sex: 'male', creatinine: mg(2.0) }), 35.2);
	});
});

describe('MDRD 175 (F6)', () => {
	it('A10: 60 y male, 1.5 mg/dL → 47.7', () => {
		// Levey AS et al., Ann Intern Med 2006;145:247–254 (formula S, citation from memory)
		expectClose(mdrd175({ ageYears: 60, sex: 'male', creatinine: mg(1.5) }), 47.7);
	});
});

describe('BSA and de-indexing (F7)', () => {
	it('A11: Mosteller 175 cm, 70 kg → 1.84 m²', () => {
		// Mosteller RD, N Engl J Med 1987;317:1098 (S) — equals a public Mosteller example (1.845 m²)
		expectClose(bsaMosteller({ heightCm: 175, weightKg: 70 }), 1.84);
	});
	it('A12: Du Bois 175 cm, 70 kg → 1.85 m²', () => {
		// Du Bois D, Du Bois EF, Arch Intern Med 1916;17:863–871 (S)
		expectClose(bsaDuBois({ heightCm: 175, weightKg: 70 }), 1.85);
	});
	it('A13: 75.4988 mL/min/1.73 m² at BSA 1.60 → 69.8 mL/min', () => {
		// de-indexing eGFR × BSA / 1.73 (CP; KDIGO CKD guidance, from memory)
		expectClose(deindexEgfr({ egfr: 75.4988, bsaM2: 1.6 }), 69.8);
	});
});

describe('one-compartment kinetics (F10–F12, F14, F15)', () => {
	it('A14: Vd 50 L, CL 5 L/h → k 0.100 /h, t½ 6.93 h', () => {
		// one-compartment identities, textbook (S)
		const r = oneCompartment({ clearanceLPerH: 5, volumeL: 50 });
		expectClose(r.kPerH, 0.1);
		expectClose(r.halfLifeH, 6.93);
	});
	it('A15: aminoglycoside CrCl 60 → k 0.190 /h, t½ 3.65 h', () => {
		// F14 regression k = 0.00293 × CrCl + 0.014 (S teaching material; attribution M)
		const r = aminoglycosideK({ crclMlMin: 60 });
		expectClose(r.kPerH, 0.19);
		expectClose(r.halfLifeH, 3.65);
	});
	it('A16: k 0.1 /h, τ 12 h → R 1.43', () => {
		// superposition, accumulation factor 1 / (1 − e^(−kτ)) (S, textbook)
		expectClose(accumulationFactor({ kPerH: 0.1, tauH: 12 }), 1.43);
	});
	it('A17: 120 mg over 0.5 h q8h, Vd 17.5 L, k 0.30 /h → Cmax,ss 7.00, Cmin,ss 0.738 mg/L', () => {
		// Sawchuk RJ, Zaske DE, J Pharmacokinet Biopharm 1976;4:183–195 (equations S; citation M)
		const r = steadyStateInfusion({ doseMg: 120, infusionH: 0.5, tauH: 8, volumeL: 17.5, kPerH: 0.3 });
		expectClose(r.peakMgL, 7.0);
		expectClose(r.troughMgL, 0.738);
	});
	it('A18: 1000 mg over 1 h q12h, Vd 49 L, k 0.072 /h, after dose 2 → 28.0 mg/L', () => {
		// superposition of intermittent infusions (F11/F12, S)
		expectClose(peakAfterDoses({ doseMg: 1000, infusionH: 1, tauH: 12, volumeL: 49, kPerH: 0.072, doses: 2 }), 28.0);
	});
	it('A19: fe 0.9, CrCl 30, normal 100 → Q 0.370', () => {
		// Giusti DL, Hayton WL, Drug Intell Clin Pharm 1973;7:382–387 (S; citation M)
		expectClose(renalAdjustmentFactor({ fe: 0.9, crclMlMin: 30, crclNormalMlMin: 100 }), 0.37);
	});
	it('A20: vancomycin CrCl 80, 70 kg, 0.7 L/kg → CL 3.53 L/h, Vd 49.0 L, k 0.0720 /h, t½ 9.63 h', () => {
		// Matzke GR et al., Antimicrob Agents Chemother 1984;25:433–437 (P)
		const r = vancomycinPopulation({ crclMlMin: 80, weightKg: 70, vdPerKg: 0.7 });
		expectClose(r.clearanceLPerH, 3.53);
		expectClose(r.volumeL, 49.0);
		expectClose(r.kPerH, 0.072);
		expectClose(r.halfLifeH, 9.63);
	});
	it('A21: Vd 49 L, target 25 mg/L → LD 1225 mg; CL 3.5268 L/h, Css,avg 15 → 52.9 mg/h', () => {
		// loading dose Vd × C and maintenance rate CL × Css,avg (F10, S)
		expectClose(loadingDose({ volumeL: 49, targetMgL: 25 }), 1225);
		expectClose(maintenanceRate({ clearanceLPerH: 3.5268, targetAvgMgL: 15 }), 52.9);
	});
});

describe('albumin binding (F16)', () => {
	it('A22: fu 0.05 at 40 g/L → 0.0952 at 20 g/L', () => {
		// mass action, single binding class (CP / textbook)
		expectClose(unboundFraction({ fuRef: 0.05, albuminRefGL: 40, albuminGL: 20 }), 0.0952);
	});
});

describe('KDIGO AKI stage (F8)', () => {
	it('A23: baseline 1.0, current 1.35, rise within 48 h 0.35 mg/dL → stage 1', () => {
		// KDIGO AKI Work Group, Kidney Int Suppl 2012;2:1–138 (S)
		expect(kdigoStage({ baseline: mg(1.0), current: mg(1.35), riseWithin48h: mg(0.35) })).toBe(1);
	});
	it('A24: baseline 80, current 170, rise 40 µmol/L → stage 2', () => {
		// KDIGO AKI Work Group, Kidney Int Suppl 2012;2:1–138 (S)
		expect(kdigoStage({ baseline: umol(80), current: umol(170), riseWithin48h: umol(40) })).toBe(2);
	});
});

describe('augmented renal clearance (F9)', () => {
	it('A25: CrCl 140 → possible ARC', () => {
		// Udy AA et al., Crit Care Med 2014;42:520–527 (P)
		expect(augmentedRenalClearance({ crclMlMin: 140 })).toBe(true);
	});
});

describe('creatinine units (F1)', () => {
	it('A26: 1.2 mg/dL → 106 µmol/L', () => {
		// creatinine 113.12 g/mol, 1 mg/dL = 88.4 µmol/L (clinical-reference §1, S)
		expectClose(creatinineUmolL(mg(1.2)), 106);
	});
});
