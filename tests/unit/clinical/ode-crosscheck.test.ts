// Independent numerical check of the closed-form infusion equations (F11, F12) against the odex ODE solver
// (Gragg–Bulirsch–Stoer; Hairer & Wanner's ODEX): dC/dt = R(t)/V − k·C, R(t) = dose/tinf during each infusion.
import { describe, expect, it } from 'vitest';
import { createRequire } from 'node:module';
import { concentrationCurve, peakAfterDoses, steadyStateInfusion } from '../../../src/lib/clinical';
import { expectClose } from './helpers';

// odex ships its TypeScript source beside the JavaScript, and that source does not pass strict type
// checks; loading it with require keeps it out of the project's type check. Its API, as used here:
type OdexSolver = {
	absoluteTolerance: number;
	relativeTolerance: number;
	solve(f: (x: number, y: number[]) => number[], x0: number, y0: number[], xEnd: number): { y: number[] };
};
const { Solver } = createRequire(import.meta.url)('odex') as { Solver: new (n: number) => OdexSolver };

type Regimen = { doseMg: number; infusionH: number; tauH: number; volumeL: number; kPerH: number };

/**
 * Integrate piecewise between infusion start/stop events (the input is discontinuous there), returning
 * C at the requested times (sorted ascending, ≥ 0). Starts from C(0) = 0 with the first dose at t = 0.
 */
function integrate(r: Regimen, sampleTimes: number[]): number[] {
	const solver = new Solver(1);
	solver.absoluteTolerance = 1e-12;
	solver.relativeTolerance = 1e-12;
	const endH = sampleTimes[sampleTimes.length - 1];
	const events: number[] = [];
	for (let s = 0; s <= endH; s += r.tauH) {
		events.push(s);
		if (r.infusionH > 0) events.push(s + r.infusionH);
	}
	const cuts = [...new Set([...events, ...sampleTimes])].filter((t) => t <= endH).sort((a, b) => a - b);
	const rate = r.infusionH > 0 ? r.doseMg / r.infusionH : 0;
	const out = new Map<number, number>();
	let c = 0;
	let t = 0;
	for (const next of cuts) {
		if (next > t) {
			const mid = (t + next) / 2;
			const infusing = r.infusionH > 0 && mid % r.tauH < r.infusionH;
			const input = infusing ? rate / r.volumeL : 0;
			const res = solver.solve((_x: number, y: number[]) => [input - r.kPerH * y[0]], t, [c], next);
			c = res.y[0];
			t = next;
		}
		out.set(next, c);
	}
	return sampleTimes.map((s) => out.get(s) as number);
}

const cases: Regimen[] = [
	{ doseMg: 120, infusionH: 0.5, tauH: 8, volumeL: 17.5, kPerH: 0.3 }, // clinical-reference A17
	{ doseMg: 1000, infusionH: 1, tauH: 12, volumeL: 49, kPerH: 0.072 }, // clinical-reference A18
	{ doseMg: 4500, infusionH: 4, tauH: 8, volumeL: 18, kPerH: 0.69 } // extended infusion, fast elimination
];

describe('closed forms against numerical integration (odex)', () => {
	it.each(cases)('steady state peak/trough: %o', (r) => {
		// integrate long enough (≥ 20 half-lives) for steady state, then read the last dose's peak and trough
		const halfLife = Math.LN2 / r.kPerH;
		const n = Math.ceil((20 * halfLife) / r.tauH) + 1;
		const start = (n - 1) * r.tauH;
		const [peak, trough] = integrate(r, [start + r.infusionH, start + r.tauH]);
		const ss = steadyStateInfusion(r);
		expectClose(ss.peakMgL, peak, 0.001);
		expectClose(ss.troughMgL, trough, 0.001);
	});

	it.each(cases)('peak after 1, 2 and 5 doses: %o', (r) => {
		for (const doses of [1, 2, 5]) {
			const [peak] = integrate(r, [(doses - 1) * r.tauH + r.infusionH]);
			expectClose(peakAfterDoses({ ...r, doses }), peak, 0.001);
		}
	});

	it.each(cases)('concentration curve over three days: %o', (r) => {
		const curve = concentrationCurve({
			regimen: { doseMg: r.doseMg, intervalH: r.tauH, infusionH: r.infusionH },
			kPerH: r.kPerH,
			volumeL: r.volumeL,
			fromH: 0.25,
			toH: 72,
			stepH: 0.25
		});
		const numeric = integrate(
			r,
			curve.map((p) => p.tH)
		);
		curve.forEach((p, i) => expectClose(p.mgL, numeric[i], 0.001));
		// the curve is not trivially flat: it rises and falls within every interval
		expect(Math.max(...curve.map((p) => p.mgL))).toBeGreaterThan(2 * Math.min(...curve.map((p) => p.mgL)));
	});
});
