// Facts of the trade (common practice, no single source): volume, clearance units, half-life rules of thumb.
import { describe, expect, it } from 'vitest';
import { concentrationCurve, loadingDose, mlMinFromLPerH, oneCompartment } from '../../../src/lib/clinical';
import { expectClose } from './helpers';

describe('facts of the trade (common practice)', () => {
	it('1,000 mg giving 200 mg/L means Vd 5 L; giving 1 mg/L means Vd 1,000 L', () => {
		// common practice: Vd = amount / concentration, checked through LD = Vd × C (F10)
		expectClose(loadingDose({ volumeL: 5, targetMgL: 200 }), 1000, 1e-12);
		expectClose(loadingDose({ volumeL: 1000, targetMgL: 1 }), 1000, 1e-12);
	});

	it('CL 1 L/min = 1,000 mL/min (60 L/h)', () => {
		// common practice: unit identity
		expectClose(mlMinFromLPerH(60), 1000, 1e-12);
	});

	it('t½ ≈ 0.7 × Vd / CL agrees with ln2 × Vd / CL within 1 %', () => {
		// common practice: ln 2 ≈ 0.693 ≈ 0.7
		for (const [cl, v] of [
			[5, 50],
			[0.5, 10],
			[12, 300]
		]) {
			const exact = oneCompartment({ clearanceLPerH: cl, volumeL: v }).halfLifeH;
			expectClose((0.7 * v) / cl, exact, 0.011);
		}
	});

	it('after one half-life 100 → 50, after two → 25 (bolus)', () => {
		// common practice: first-order decline halves every t½. Dose 1000 mg into 10 L gives 100 mg/L at t = 0.
		const { halfLifeH, kPerH } = oneCompartment({ clearanceLPerH: 1, volumeL: 10 });
		const curve = concentrationCurve({
			regimen: { doseMg: 1000, intervalH: 1000, infusionH: 0 },
			kPerH,
			volumeL: 10,
			fromH: 0,
			toH: 2 * halfLifeH,
			stepH: halfLifeH
		});
		expect(curve).toHaveLength(3);
		expectClose(curve[0].mgL, 100, 1e-9);
		expectClose(curve[1].mgL, 50, 1e-9);
		expectClose(curve[2].mgL, 25, 1e-9);
	});
});
