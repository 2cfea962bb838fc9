// The patient view's projection: the target window an agent defines and the curves drawn for a
// regimen. Checked against the one-compartment identities and published targets, not against the
// code that draws them.
import { describe, expect, it } from 'vitest';
import { projectSeries, targetWindow } from '../../src/lib/projection';
import { libraryAgent } from '../fixtures/board';

describe('targetWindow', () => {
	it('turns an AUC24 target into the average steady-state concentration band', () => {
		// Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864 (from memory): vancomycin AUC24 400–600 mg·h/L;
		// Css,avg = AUC24 / 24 h (one-compartment identity): 16.7–25 mg/L
		const t = targetWindow(libraryAgent('J01XA01').params)!;
		expect(t.band!.lowMgL).toBeCloseTo(16.667, 3);
		expect(t.band!.highMgL).toBeCloseTo(25, 9);
		// AUC-guided: no trough ceiling of its own (trough-only targets are no longer recommended, same source)
		expect(t.troughMaxMgL).toBeNull();
		expect(t.band!.source).toContain('Rybak');
	});
	it('spans trough ceiling to peak target for an aminoglycoside', () => {
		// gentamicin once daily: trough below 1 mg/L, peak near 20 mg/L (common practice; values are the library's example data)
		const t = targetWindow(libraryAgent('J01GB03').params)!;
		expect(t.band).toMatchObject({ lowMgL: 1, highMgL: 20 });
	});
	it('gives no window for an agent with no concentration target', () => {
		expect(targetWindow(libraryAgent('J01DH02').params)).toBeNull();
	});
});

describe('projectSeries', () => {
	// Vd 50 L, CL 5 L/h → k 0.1 /h, t½ 6.93 h (textbook one-compartment numbers, chosen for easy arithmetic)
	const kinetics = { clearanceLPerH: 5, volumeL: 50, kPerH: 0.1, halfLifeH: Math.LN2 / 0.1 };

	it('starts at zero and, for a bolus, peaks at dose / Vd after the first dose', () => {
		const s = projectSeries('current', 'bolus', { doseMg: 1000, intervalH: 12, infusionH: 0 }, kinetics, 24, 0.25);
		expect(s.points[0]).toEqual({ tH: 0, mgL: 20 }); // C0 = D / V = 1000 mg / 50 L
		expect(s.points.find((p) => p.tH === 12 - 0.25)!.mgL).toBeCloseTo(20 * Math.exp(-0.1 * 11.75), 2);
		expect(s.points).toHaveLength(24 / 0.25 + 1);
	});
	it('approaches the steady-state peak and trough (accumulation factor 1 / (1 − e^−kτ)) after many doses', () => {
		const s = projectSeries('current', 'bolus q12h', { doseMg: 1000, intervalH: 12, infusionH: 0 }, kinetics, 72, 0.25);
		const accumulation = 1 / (1 - Math.exp(-0.1 * 12));
		expect(s.peakMgL).toBeCloseTo(20 * accumulation, 6);
		expect(s.troughMgL).toBeCloseTo(20 * accumulation * Math.exp(-1.2), 6);
		// at 72 h (the 7th dose, ~10 half-lives in) the curve is within 1 % of steady state
		expect(s.points.at(-1)!.mgL).toBeGreaterThan(0.99 * s.peakMgL);
		expect(s.points.at(-1)!.mgL).toBeLessThanOrEqual(s.peakMgL + 1e-6);
	});
	it('gives AUC24 = daily dose / CL', () => {
		const s = projectSeries('proposed', 'x', { doseMg: 1000, intervalH: 12, infusionH: 1 }, kinetics);
		expect(s.auc24MgHL).toBeCloseTo(2000 / 5, 9);
	});
});
