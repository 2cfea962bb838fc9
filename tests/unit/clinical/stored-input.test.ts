// An assessment is stored as its inputs and its trace re-run on demand, so storing and reviving the
// inputs must give exactly the same assessment — result and trace — for every agent and history.
// (Determinism of a pure function: common practice, no published source needed.)
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import agentsFile from '../../../fixtures/agents.json';
import { assess, reviveAssessInput, storeAssessInput, type AgentParams, type AssessInput } from '../../../src/lib/clinical';

const agents = agentsFile.agents as unknown as AgentParams[];
const HOUR_MS = 3_600_000;
const at = new Date('2026-03-10T08:00:00Z');

const series = <T>(value: fc.Arbitrary<T>) =>
	fc
		.array(fc.tuple(fc.integer({ min: 1, max: 9 * 24 }), value), { minLength: 0, maxLength: 12 })
		.map((items) => items.map(([hoursBefore, v]) => ({ at: new Date(at.getTime() - hoursBefore * HOUR_MS), v })));

const inputs: fc.Arbitrary<AssessInput> = fc
	.record({
		agent: fc.constantFrom(...agents),
		sex: fc.constantFrom('female' as const, 'male' as const),
		birthOrAge: fc.oneof(
			fc.integer({ min: 18, max: 99 }).map((ageYears) => ({ ageYears })),
			fc.integer({ min: 1930, max: 2006 }).map((y) => ({ birthDate: new Date(`${y}-06-15T00:00:00Z`) }))
		),
		heights: series(fc.integer({ min: 140, max: 200 })),
		weights: series(fc.integer({ min: 40, max: 180 })),
		creatinine: series(fc.tuple(fc.double({ min: 0.3, max: 9, noNaN: true }), fc.constantFrom('mg/dL' as const, 'umol/L' as const))),
		albumin: series(fc.integer({ min: 12, max: 50 })),
		doseMg: fc.integer({ min: 100, max: 4000 }),
		intervalH: fc.constantFrom(6, 8, 12, 24, 36, 48),
		route: fc.constantFrom('iv' as const, 'po' as const, 'im' as const),
		dialysis: fc.option(
			fc.tuple(
				fc.constantFrom('ihd' as const, 'pd' as const, 'crrt' as const),
				fc.integer({ min: 1, max: 20 * 24 }),
				fc.option(fc.integer({ min: 0, max: 24 * 10 }), { nil: null })
			),
			{ nil: null }
		),
		firstDoseH: fc.option(fc.integer({ min: 0, max: 96 }), { nil: null }),
		restartH: fc.option(fc.integer({ min: 0, max: 48 }), { nil: null }),
		settings: fc.option(fc.record({ obeseRatio: fc.constantFrom(1.2, 1.3), scrFloorMgDl: fc.constantFrom(null, 0.8) }), { nil: undefined })
	})
	.map((r) => ({
		at,
		patient: {
			...r.birthOrAge,
			sex: r.sex,
			heights: r.heights.map((h) => ({ at: h.at, cm: h.v })),
			weights: r.weights.map((w) => ({ at: w.at, kg: w.v })),
			...(r.dialysis
				? {
						renalReplacement: [
							{
								mode: r.dialysis[0],
								from: new Date(at.getTime() - r.dialysis[1] * HOUR_MS),
								to: r.dialysis[2] === null ? null : new Date(at.getTime() - r.dialysis[2] * HOUR_MS)
							}
						]
					}
				: {})
		},
		creatinine: r.creatinine.map((c) => ({ at: c.at, creatinine: { value: c.v[1] === 'umol/L' ? Math.round(c.v[0] * 88.4) : c.v[0], unit: c.v[1] } })),
		albumin: r.albumin.map((a) => ({ at: a.at, gL: a.v })),
		agent: r.agent,
		order: {
			doseMg: r.doseMg,
			intervalH: r.intervalH,
			infusionH: r.route === 'iv' ? 0.5 : 0,
			route: r.route,
			startAt: new Date(at.getTime() - 100 * HOUR_MS),
			...(r.firstDoseH !== null ? { firstDoseAt: new Date(at.getTime() - r.firstDoseH * HOUR_MS) } : {}),
			...(r.restartH !== null ? { restartAt: new Date(at.getTime() - r.restartH * HOUR_MS) } : {})
		},
		...(r.settings ? { settings: r.settings } : {})
	}));

describe('stored assessment inputs', () => {
	it('store → JSON → revive gives the same assessment, trace included', () => {
		fc.assert(
			fc.property(inputs, (input) => {
				const stored = JSON.parse(JSON.stringify(storeAssessInput(input)));
				expect(assess(reviveAssessInput(stored))).toEqual(assess(input));
			}),
			{ numRuns: 300 }
		);
	});

	it('is much smaller than the trace it replaces', () => {
		const input = fc.sample(inputs, { numRuns: 1, seed: 7 })[0];
		const storedBytes = JSON.stringify(storeAssessInput(input)).length;
		const traceBytes = JSON.stringify(assess(input).trace).length;
		expect(storedBytes * 3).toBeLessThan(traceBytes);
	});

	it('refuses inputs of an unknown version', () => {
		expect(() => reviveAssessInput({ v: 2 } as never)).toThrow(/unknown version 2/);
	});
});
