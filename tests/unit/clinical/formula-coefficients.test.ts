// Pins the coefficients of the renal-function and body-size formulas that no other test exercised on
// the branch where they matter: CKD-EPI 2021 below κ for each sex, the MDRD female factor, and the
// dosing-weight choice between 1.2 and 1.3 × IBW. Expected values are written out from the published
// equations with literal constants (and a few worked by hand), never from the code under test.
import { describe, expect, it } from 'vitest';
import { chooseDosingWeight, ckdEpi2021, cockcroftGault, dosingWeight, idealBodyWeight, mdrd175, type Sex } from '../../../src/lib/clinical';
import { expectClose } from './helpers';

const mg = (value: number) => ({ value, unit: 'mg/dL' as const });

/** Inker LA, Eneanya ND, Coresh J et al., N Engl J Med 2021;385:1737–1749 — written out independently. */
function ckdEpi2021Reference(age: number, sex: Sex, scr: number): number {
	const female = sex === 'female';
	const kappa = female ? 0.7 : 0.9;
	const alpha = female ? -0.241 : -0.302;
	return 142 * Math.min(scr / kappa, 1) ** alpha * Math.max(scr / kappa, 1) ** -1.2 * 0.9938 ** age * (female ? 1.012 : 1);
}

describe('CKD-EPI 2021 creatinine equation (Inker LA et al., N Engl J Med 2021;385:1737–1749)', () => {
	it('below κ, female (SCr 0.5 < 0.7): the α = −0.241 branch and the 1.012 factor', () => {
		// 142 × (0.5/0.7)^−0.241 × 0.9938^40 × 1.012 = 142 × 1.08444 × 0.77988 × 1.012 = 121.52
		const e = ckdEpi2021({ ageYears: 40, sex: 'female', creatinine: mg(0.5) });
		expectClose(e, 121.52);
		expectClose(e, ckdEpi2021Reference(40, 'female', 0.5), 1e-9);
	});

	it('below κ, male (SCr 0.6 < 0.9): the α = −0.302 branch, no sex factor', () => {
		// 142 × (0.6/0.9)^−0.302 × 0.9938^40 = 142 × 1.13019 × 0.77988 = 125.15
		const e = ckdEpi2021({ ageYears: 40, sex: 'male', creatinine: mg(0.6) });
		expectClose(e, 125.15);
		expectClose(e, ckdEpi2021Reference(40, 'male', 0.6), 1e-9);
	});

	it('above κ for each sex: the −1.200 exponent and κ itself (female κ 0.7, male κ 0.9)', () => {
		// female 60 y, SCr 1.2: 142 × (1.2/0.7)^−1.2 × 0.9938^60 × 1.012 = 51.82
		expectClose(ckdEpi2021({ ageYears: 60, sex: 'female', creatinine: mg(1.2) }), 51.821);
		// male 60 y at exactly κ (0.9): both min and max terms are 1 → 142 × 0.9938^60 = 97.78
		expectClose(ckdEpi2021({ ageYears: 60, sex: 'male', creatinine: mg(0.9) }), 97.775);
	});

	it('the age term 0.9938^age: ten years older is × 0.9938^10 at the same creatinine', () => {
		for (const sex of ['female', 'male'] as const) {
			const ratio = ckdEpi2021({ ageYears: 70, sex, creatinine: mg(0.6) }) / ckdEpi2021({ ageYears: 60, sex, creatinine: mg(0.6) });
			expectClose(ratio, 0.9938 ** 10, 1e-9);
		}
	});

	it('agrees with the written-out equation across both branches and both sexes', () => {
		for (const sex of ['female', 'male'] as const)
			for (const scr of [0.3, 0.5, 0.69, 0.7, 0.71, 0.89, 0.9, 0.91, 1.5, 4, 8])
				for (const age of [18, 45, 90]) expectClose(ckdEpi2021({ ageYears: age, sex, creatinine: mg(scr) }), ckdEpi2021Reference(age, sex, scr), 1e-9);
	});
});

describe('MDRD 4-variable, IDMS "175" (Levey AS et al., Ann Intern Med 2006;145:247–254 — citation from memory)', () => {
	it('the female factor 0.742: same creatinine and age, female / male = 0.742', () => {
		const f = mdrd175({ ageYears: 60, sex: 'female', creatinine: mg(1.5) });
		const m = mdrd175({ ageYears: 60, sex: 'male', creatinine: mg(1.5) });
		expectClose(f / m, 0.742, 1e-9);
		// 175 × 1.5^−1.154 × 60^−0.203 × 0.742 = 35.42
		expectClose(f, 35.422);
		// the reference's A10: male 60 y, SCr 1.5 → 47.7
		expectClose(m, 47.738);
	});
});

describe('dosing weight for Cockcroft–Gault (common practice; Cockcroft DW, Gault MH, Nephron 1976;16:31–41)', () => {
	// male 175 cm: IBW = 50 + 2.3 × (175/2.54 − 60) = 70.465 kg (Devine BJ, Drug Intell Clin Pharm 1974;8:650–655)
	const ibw = 70.46457;

	it('between 1.2 and 1.3 × IBW (TBW 88 kg = 1.249 × IBW): adjusted weight at the default ratio 1.2, IBW at 1.3', () => {
		// AdjBW = 70.465 + 0.4 × (88 − 70.465) = 77.479 kg
		const atDefault = dosingWeight({ heightCm: 175, sex: 'male', weightKg: 88 });
		expect(atDefault.basis).toBe('adjusted');
		expectClose(atDefault.weightKg, 77.479);
		const at13 = dosingWeight({ heightCm: 175, sex: 'male', weightKg: 88, obeseRatio: 1.3 });
		expect(at13.basis).toBe('ideal');
		expectClose(at13.weightKg, ibw);
		// CrCl (60 y, SCr 1.0): 80 × 77.479 / 72 = 86.09 mL/min on AdjBW; 80 × 70.465 / 72 = 78.29 on IBW
		expectClose(cockcroftGault({ ageYears: 60, sex: 'male', weightKg: atDefault.weightKg, creatinine: mg(1.0) }), 86.087);
		expectClose(cockcroftGault({ ageYears: 60, sex: 'male', weightKg: at13.weightKg, creatinine: mg(1.0) }), 78.294);
	});

	it('exactly at 1.2 × IBW: IBW (the obese branch starts above it); just below IBW: actual weight', () => {
		expect(chooseDosingWeight(1.2 * ibw, ibw, 1.2)).toMatchObject({ basis: 'ideal', weightKg: ibw });
		expect(chooseDosingWeight(1.2 * ibw + 0.01, ibw, 1.2).basis).toBe('adjusted');
		expect(chooseDosingWeight(ibw - 0.01, ibw, 1.2)).toMatchObject({ basis: 'actual', weightKg: ibw - 0.01 });
	});

	it('the adjusted-weight factor 0.4: AdjBW moves 0.4 kg per kg above IBW', () => {
		const a = chooseDosingWeight(150, ibw, 1.2).weightKg;
		const b = chooseDosingWeight(151, ibw, 1.2).weightKg;
		expectClose(b - a, 0.4, 1e-9);
		expectClose(a, ibw + 0.4 * (150 - ibw), 1e-9);
	});
});

describe('Devine ideal body weight (Devine BJ, Drug Intell Clin Pharm 1974;8:650–655)', () => {
	it('50 kg (male) / 45.5 kg (female) at 60 in, plus 2.3 kg per inch', () => {
		expectClose(idealBodyWeight({ heightCm: 152.4, sex: 'male' }), 50, 1e-9);
		expectClose(idealBodyWeight({ heightCm: 152.4, sex: 'female' }), 45.5, 1e-9);
		// female 160 cm: 45.5 + 2.3 × (62.992 − 60) = 52.382
		expectClose(idealBodyWeight({ heightCm: 160, sex: 'female' }), 52.382);
		expectClose(idealBodyWeight({ heightCm: 152.4 + 2.54, sex: 'male' }) - 50, 2.3, 1e-9);
	});
});
