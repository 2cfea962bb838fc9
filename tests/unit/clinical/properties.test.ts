// Property tests (fast-check): monotonicity and bounds that must hold for any valid input, and typed errors
// naming the input for any invalid one.
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
	aminoglycosideK,
	assess,
	ClinicalInputError,
	ckdEpi2021,
	cockcroftGault,
	idealBodyWeight,
	kdigoStage,
	oneCompartment,
	renalAdjustmentFactor,
	steadyStateInfusion,
	unboundFraction,
	vancomycinPopulation,
	type AgentParams,
	type AssessInput
} from '../../../src/lib/clinical';
import agentsFile from '../../../fixtures/agents.json';

const agents = agentsFile.agents as unknown as AgentParams[];
const meropenem = agents.find((a) => a.name === 'Meropenem') as AgentParams;

const age = fc.double({ min: 18, max: 110, noNaN: true });
const sex = fc.constantFrom<'female' | 'male'>('female', 'male');
const weight = fc.double({ min: 30, max: 250, noNaN: true });
const scr = fc.double({ min: 0.2, max: 15, noNaN: true });
const crcl = fc.double({ min: 0, max: 250, noNaN: true });
const fe = fc.double({ min: 0, max: 1, noNaN: true });
const bad = fc.constantFrom(-1, 0, -0.001, Number.NaN, Number.POSITIVE_INFINITY, Number.NEGATIVE_INFINITY);

describe('monotonicity (common practice: what every clinician expects of these equations)', () => {
	it('Cockcroft–Gault falls as creatinine rises', () => {
		fc.assert(
			fc.property(age, sex, weight, scr, fc.double({ min: 1.01, max: 5, noNaN: true }), (a, s, w, c, factor) => {
				const low = cockcroftGault({ ageYears: a, sex: s, weightKg: w, creatinine: { value: c, unit: 'mg/dL' } });
				const high = cockcroftGault({ ageYears: a, sex: s, weightKg: w, creatinine: { value: c * factor, unit: 'mg/dL' } });
				expect(high).toBeLessThan(low);
			})
		);
	});

	it('CKD-EPI 2021 falls as creatinine rises', () => {
		fc.assert(
			fc.property(age, sex, scr, fc.double({ min: 1.01, max: 5, noNaN: true }), (a, s, c, factor) => {
				const low = ckdEpi2021({ ageYears: a, sex: s, creatinine: { value: c, unit: 'mg/dL' } });
				const high = ckdEpi2021({ ageYears: a, sex: s, creatinine: { value: c * factor, unit: 'mg/dL' } });
				expect(high).toBeLessThan(low);
			})
		);
	});

	it('t½ is positive and grows as CrCl falls (renally cleared agents)', () => {
		fc.assert(
			// fe below 1: with fe = 1 and CrCl ≈ 0 a generic agent has no clearance at all (Q = 0), a case the library
			// never holds (its highest fe is 0.95) and the one-compartment identities rightly refuse
			fc.property(
				fc.double({ min: 1, max: 250, noNaN: true }),
				fc.double({ min: 0.01, max: 1, noNaN: true }),
				weight,
				fc.double({ min: 0.5, max: 0.99, noNaN: true }),
				(c, dropFraction, w, f) => {
					const lower = c * (1 - dropFraction);
					// aminoglycoside (F14) and vancomycin (F15) population models
					const agHigh = aminoglycosideK({ crclMlMin: c }).halfLifeH;
					const agLow = aminoglycosideK({ crclMlMin: lower }).halfLifeH;
					expect(agHigh).toBeGreaterThan(0);
					expect(agLow).toBeGreaterThan(agHigh);
					const vHigh = vancomycinPopulation({ crclMlMin: c, weightKg: w }).halfLifeH;
					const vLow = vancomycinPopulation({ crclMlMin: lower, weightKg: w }).halfLifeH;
					expect(vHigh).toBeGreaterThan(0);
					expect(vLow).toBeGreaterThan(vHigh);
					// generic agent (F13): CL = Q × CL_normal, Vd unchanged; strictly only while CrCl is below normal
					if (lower < 100) {
						const clNormal = 10;
						const tHigh = oneCompartment({ clearanceLPerH: clNormal * renalAdjustmentFactor({ fe: f, crclMlMin: c }), volumeL: 20 }).halfLifeH;
						const tLow = oneCompartment({ clearanceLPerH: clNormal * renalAdjustmentFactor({ fe: f, crclMlMin: lower }), volumeL: 20 }).halfLifeH;
						expect(tLow).toBeGreaterThan(tHigh);
					}
				}
			)
		);
	});

	it('assess(): expected t½ of meropenem grows as today’s creatinine rises', () => {
		const at = new Date('2025-01-10T08:00:00Z');
		const base = (scrMgDl: number): AssessInput => ({
			at,
			patient: { ageYears: 60, sex: 'female', heights: [{ at: new Date('2025-01-01'), cm: 165 }], weights: [{ at: new Date('2025-01-01'), kg: 70 }] },
			creatinine: [{ at: new Date('2025-01-10T06:00:00Z'), creatinine: { value: scrMgDl, unit: 'mg/dL' } }],
			albumin: [{ at: new Date('2025-01-10T06:00:00Z'), gL: 35 }],
			agent: meropenem,
			order: { doseMg: 1000, intervalH: 8, infusionH: 0.5, route: 'iv', startAt: new Date('2025-01-09T08:00:00Z') }
		});
		fc.assert(
			fc.property(fc.double({ min: 0.7, max: 8, noNaN: true }), fc.double({ min: 1.05, max: 3, noNaN: true }), (c, factor) => {
				const a = assess(base(c)).kinetics.now;
				const b = assess(base(c * factor)).kinetics.now;
				expect(a && b).toBeTruthy();
				expect(a!.halfLifeH).toBeGreaterThan(0);
				expect(b!.halfLifeH).toBeGreaterThan(a!.halfLifeH);
			}),
			{ numRuns: 200 }
		);
	});

	it('KDIGO stage never falls as the current creatinine rises', () => {
		fc.assert(
			fc.property(
				scr,
				fc.double({ min: 0, max: 3, noNaN: true }),
				fc.double({ min: 1, max: 6, noNaN: true }),
				fc.double({ min: 1, max: 2, noNaN: true }),
				(b, rise, r1, r2) => {
					const s1 = kdigoStage({
						baseline: { value: b, unit: 'mg/dL' },
						current: { value: b * r1, unit: 'mg/dL' },
						riseWithin48h: { value: rise, unit: 'mg/dL' }
					});
					const s2 = kdigoStage({
						baseline: { value: b, unit: 'mg/dL' },
						current: { value: b * r1 * r2, unit: 'mg/dL' },
						riseWithin48h: { value: rise, unit: 'mg/dL' }
					});
					expect(s2).toBeGreaterThanOrEqual(s1);
				}
			)
		);
	});
});

describe('bounds', () => {
	it('Q lies within [1 − fe, 1] (ratio capped at 1)', () => {
		fc.assert(
			fc.property(fe, crcl, fc.double({ min: 60, max: 150, noNaN: true }), (f, c, normal) => {
				const q = renalAdjustmentFactor({ fe: f, crclMlMin: c, crclNormalMlMin: normal });
				expect(q).toBeGreaterThanOrEqual(1 - f - 1e-12);
				expect(q).toBeLessThanOrEqual(1 + 1e-12);
			})
		);
	});

	it('unbound fraction stays in (0, 1] and rises as albumin falls (F16)', () => {
		fc.assert(
			fc.property(
				fc.double({ min: 0.01, max: 0.99, noNaN: true }),
				fc.double({ min: 5, max: 60, noNaN: true }),
				fc.double({ min: 1.01, max: 3, noNaN: true }),
				(fuRef, alb, factor) => {
					const hi = unboundFraction({ fuRef, albuminGL: alb });
					const lo = unboundFraction({ fuRef, albuminGL: alb * factor });
					expect(hi).toBeGreaterThan(0);
					expect(hi).toBeLessThanOrEqual(1);
					expect(hi).toBeGreaterThan(lo);
				}
			)
		);
	});

	it('steady-state trough never exceeds the peak', () => {
		fc.assert(
			fc.property(
				fc.double({ min: 1, max: 5000, noNaN: true }),
				fc.double({ min: 0, max: 1, noNaN: true }),
				fc.constantFrom(6, 8, 12, 24, 48),
				fc.double({ min: 1, max: 200, noNaN: true }),
				fc.double({ min: 0.005, max: 3, noNaN: true }),
				(dose, infFraction, tau, v, k) => {
					const r = steadyStateInfusion({ doseMg: dose, infusionH: infFraction * tau, tauH: tau, volumeL: v, kPerH: k });
					expect(r.troughMgL).toBeLessThanOrEqual(r.peakMgL * (1 + 1e-12));
					expect(r.troughMgL).toBeGreaterThan(0);
				}
			)
		);
	});
});

describe('bad inputs throw ClinicalInputError naming the input', () => {
	function expectNamed(fn: () => unknown, name: string): void {
		try {
			fn();
		} catch (e) {
			expect(e).toBeInstanceOf(ClinicalInputError);
			expect((e as ClinicalInputError).input).toBe(name);
			expect((e as Error).message).toContain(name);
			return;
		}
		throw new Error(`expected ClinicalInputError for ${name}`);
	}

	it('Cockcroft–Gault: weightKg, ageYears, creatinine.value', () => {
		fc.assert(
			fc.property(bad, (v) => {
				expectNamed(() => cockcroftGault({ ageYears: 50, sex: 'male', weightKg: v, creatinine: { value: 1, unit: 'mg/dL' } }), 'weightKg');
				expectNamed(() => cockcroftGault({ ageYears: v, sex: 'male', weightKg: 70, creatinine: { value: 1, unit: 'mg/dL' } }), 'ageYears');
				expectNamed(() => cockcroftGault({ ageYears: 50, sex: 'male', weightKg: 70, creatinine: { value: v, unit: 'mg/dL' } }), 'creatinine.value');
			})
		);
	});

	it('adult equations reject ages below 18', () => {
		fc.assert(
			fc.property(fc.double({ min: 0, max: 17.99, noNaN: true }), (a) => {
				expectNamed(() => cockcroftGault({ ageYears: a, sex: 'female', weightKg: 50, creatinine: { value: 0.6, unit: 'mg/dL' } }), 'ageYears');
				expectNamed(() => ckdEpi2021({ ageYears: a, sex: 'female', creatinine: { value: 0.6, unit: 'mg/dL' } }), 'ageYears');
			})
		);
	});

	it('kinetics: clearanceLPerH, volumeL, kPerH, tauH, heightCm, albuminGL', () => {
		fc.assert(
			fc.property(bad, (v) => {
				expectNamed(() => oneCompartment({ clearanceLPerH: v, volumeL: 10 }), 'clearanceLPerH');
				expectNamed(() => oneCompartment({ clearanceLPerH: 1, volumeL: v }), 'volumeL');
				expectNamed(() => steadyStateInfusion({ doseMg: 100, infusionH: 0.5, tauH: 8, volumeL: 10, kPerH: v }), 'kPerH');
				expectNamed(() => steadyStateInfusion({ doseMg: 100, infusionH: 0.5, tauH: v, volumeL: 10, kPerH: 0.1 }), 'tauH');
				expectNamed(() => idealBodyWeight({ heightCm: v, sex: 'male' }), 'heightCm');
				expectNamed(() => unboundFraction({ fuRef: 0.1, albuminGL: v }), 'albuminGL');
			})
		);
	});

	it('CrCl may be 0 (anuric) but not negative or non-finite', () => {
		expect(aminoglycosideK({ crclMlMin: 0 }).kPerH).toBeCloseTo(0.014, 12);
		for (const v of [-1, Number.NaN, Number.POSITIVE_INFINITY]) {
			expectNamed(() => aminoglycosideK({ crclMlMin: v }), 'crclMlMin');
			expectNamed(() => renalAdjustmentFactor({ fe: 0.5, crclMlMin: v }), 'crclMlMin');
		}
	});

	it('assess(): bad order values name the field', () => {
		const at = new Date('2025-01-10T08:00:00Z');
		fc.assert(
			fc.property(bad, (v) => {
				const input: AssessInput = {
					at,
					patient: { ageYears: 60, sex: 'male', heights: [], weights: [] },
					creatinine: [],
					albumin: [],
					agent: meropenem,
					order: { doseMg: v, intervalH: 8, infusionH: 0.5, route: 'iv', startAt: at }
				};
				expectNamed(() => assess(input), 'order.doseMg');
				expectNamed(() => assess({ ...input, order: { ...input.order, doseMg: 1000, intervalH: v } }), 'order.intervalH');
				expectNamed(
					() => assess({ ...input, order: { ...input.order, doseMg: 1000 }, patient: { ...input.patient, weights: [{ at, kg: v }] } }),
					'patient.weights.kg'
				);
			})
		);
	});
});
