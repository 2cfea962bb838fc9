// Unit conversions cross-checked with the UCUM reference implementation (@lhncbc/ucum-lhc, NLM).
import { describe, expect, it } from 'vitest';
import ucum from '@lhncbc/ucum-lhc';
import { albuminGLFromGdL, CREATININE_MOLAR_MASS_G_PER_MOL, cmFromInches, creatinineMgDl, creatinineUmolL, kgFromPounds } from '../../../src/lib/clinical';
import { expectClose } from './helpers';

const utils = ucum.UcumLhcUtils.getInstance();

function convert(from: string, value: number, to: string, molecularWeight?: number): number {
	const res = utils.convertUnitTo(from, value, to, molecularWeight === undefined ? {} : { molecularWeight });
	expect(res.status, JSON.stringify(res.msg)).toBe('succeeded');
	return res.toVal as number;
}

describe('creatinine mg/dL ↔ µmol/L (molar mass 113.12 g/mol)', () => {
	it.each([0.5, 1.0, 1.2, 4.0, 10])('%f mg/dL', (mgdl) => {
		// UCUM mass→substance conversion with creatinine's molar mass; the clinical factor 88.4 (KDIGO 2012)
		// is 113.12 g/mol rounded, so the two agree within 0.01 %.
		const viaUcum = convert('mg/dL', mgdl, 'umol/L', CREATININE_MOLAR_MASS_G_PER_MOL);
		expectClose(creatinineUmolL({ value: mgdl, unit: 'mg/dL' }), viaUcum, 1e-4);
		expectClose(creatinineMgDl({ value: viaUcum, unit: 'umol/L' }), mgdl, 1e-4);
	});
	it('KDIGO thresholds: 0.3 mg/dL ≈ 26.5 µmol/L and 4.0 mg/dL ≈ 353.6 µmol/L', () => {
		// KDIGO AKI Work Group, Kidney Int Suppl 2012;2:1–138 (S): thresholds quoted in both units
		expectClose(convert('mg/dL', 0.3, 'umol/L', 113.12), 26.5, 0.001);
		expectClose(convert('mg/dL', 4.0, 'umol/L', 113.12), 353.6, 0.001);
	});
});

describe('albumin, height and weight', () => {
	it('g/dL → g/L', () => {
		// UCUM: 1 g/dL = 10 g/L
		for (const gdl of [1.5, 2.8, 4.2]) expectClose(albuminGLFromGdL(gdl), convert('g/dL', gdl, 'g/L'), 1e-12);
	});
	it('[lb_av] → kg', () => {
		// UCUM avoirdupois pound = 0.45359237 kg (exact); clinical-reference's ÷ 2.2046 agrees to 0.001 %
		for (const lb of [110, 154, 330]) {
			expectClose(kgFromPounds(lb), convert('[lb_av]', lb, 'kg'), 1e-12);
			expectClose(lb / 2.2046, convert('[lb_av]', lb, 'kg'), 1e-4);
		}
	});
	it('[in_i] → cm', () => {
		// UCUM international inch = 2.54 cm (exact)
		for (const inches of [60, 66, 70]) expectClose(cmFromInches(inches), convert('[in_i]', inches, 'cm'), 1e-12);
	});
});
