// The measured-levels chart's curves: concentrations of the doses actually given (own kinetics and population)
// up to now and the proposal continued from the next dose. Checked against the one-compartment closed forms
// written out here (Rowland M, Tozer TN, Clinical Pharmacokinetics and Pharmacodynamics: bolus C = D/V·e^(−kt);
// infusion end C = R/(kV)·(1 − e^(−kT))), not against the code that draws them.
import { describe, expect, it } from 'vitest';
import type { HistoryDose } from '../../src/lib/clinical/levels-types';
import { LEVELS_AHEAD_H, levelCurves } from '../../src/lib/levels-chart';

const HOUR_MS = 3_600_000;
const T0 = Date.UTC(2026, 2, 1, 8);
// CL 5 L/h, V 50 L → k 0.1 /h (textbook numbers chosen for easy arithmetic)
const own = { clearanceLPerH: 5, volumeL: 50, kPerH: 0.1, halfLifeH: Math.LN2 / 0.1 };
const pop = { clearanceLPerH: 10, volumeL: 50, kPerH: 0.2, halfLifeH: Math.LN2 / 0.2 };
const dose = (h: number, durationH: number, doseMg = 1000): HistoryDose => ({ startMs: T0 + h * HOUR_MS, durationH, doseMg, source: 'given' });

describe('levelCurves', () => {
	it('draws a bolus as D/V·e^(−kt) with the own and the population kinetics', () => {
		const c = levelCurves({
			doses: [dose(0, 0)],
			atMs: T0 + 10 * HOUR_MS,
			individual: own,
			population: pop,
			proposal: null,
			currentIntervalH: 12,
			levelTimesH: [6]
		})!;
		expect(c.nowH).toBe(10);
		expect(c.fromH).toBe(0);
		expect(c.toH).toBe(10 + LEVELS_AHEAD_H);
		for (const p of c.individual) expect(p.mgL).toBeCloseTo(20 * Math.exp(-0.1 * p.tH), 2);
		for (const p of c.population) expect(p.mgL).toBeCloseTo(20 * Math.exp(-0.2 * p.tH), 2);
		expect(c.individual.at(-1)!.tH).toBe(10);
		expect(c.proposal).toEqual([]);
	});

	it('samples the end of each infusion, so the drawn peak is the true one', () => {
		const c = levelCurves({
			doses: [dose(0, 1.1)],
			atMs: T0 + 8 * HOUR_MS,
			individual: own,
			population: null,
			proposal: null,
			currentIntervalH: 12,
			levelTimesH: []
		})!;
		const peak = c.individual.find((p) => p.tH === 1.1)!;
		// R = 1000/1.1 mg/h; C(T) = R/(kV)·(1 − e^(−kT))
		expect(peak.mgL).toBeCloseTo((1000 / 1.1 / (0.1 * 50)) * (1 - Math.exp(-0.1 * 1.1)), 2);
		expect(Math.max(...c.individual.map((p) => p.mgL))).toBe(peak.mgL);
		expect(c.population).toEqual([]);
	});

	it('continues with the proposal one interval after the last dose, on top of what is still there', () => {
		// a bolus 1000 mg at 0 h, now 4 h, current interval 12 h: the proposal (500 mg bolus every 24 h) starts at 12 h
		const c = levelCurves({
			doses: [dose(0, 0)],
			atMs: T0 + 4 * HOUR_MS,
			individual: own,
			population: pop,
			proposal: { doseMg: 500, intervalH: 24, infusionH: 0 },
			currentIntervalH: 12,
			levelTimesH: []
		})!;
		expect(c.proposalStartH).toBe(12);
		expect(c.proposal[0].tH).toBe(4);
		const at = (tH: number) => c.proposal.find((p) => p.tH === tH)!.mgL;
		expect(at(8)).toBeCloseTo(20 * Math.exp(-0.8), 2);
		expect(at(20)).toBeCloseTo(20 * Math.exp(-2) + 10 * Math.exp(-0.8), 2);
		expect(at(40)).toBeCloseTo(20 * Math.exp(-4) + 10 * Math.exp(-2.8) + 10 * Math.exp(-0.4), 2);
	});

	it('widens to the left for a level drawn before the first dose, and draws nothing without a dose', () => {
		const c = levelCurves({
			doses: [dose(0, 1)],
			atMs: T0 + 30 * HOUR_MS,
			individual: own,
			population: pop,
			proposal: null,
			currentIntervalH: 12,
			levelTimesH: [-3, 20]
		})!;
		expect(c.fromH).toBe(-4);
		expect(c.individual[0]).toEqual({ tH: -4, mgL: 0 });
		expect(levelCurves({ doses: [], atMs: T0, individual: own, population: pop, proposal: null, currentIntervalH: 12, levelTimesH: [] })).toBeNull();
	});
});
