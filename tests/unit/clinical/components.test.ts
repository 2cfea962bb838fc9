// Building blocks behind assess(): KDIGO staging from a history, kinetic GFR, regimen rounding and bands,
// the albumin model and the input checks of the curve. Expected values are worked by hand from the named formulas.
import { describe, expect, it } from 'vitest';
import {
	albuminAdjustedKinetics,
	assess,
	auc24,
	bandLabel,
	ClinicalInputError,
	compareDailyDose,
	concentrationCurve,
	creatinineMaxRisePerDay,
	findBand,
	kdigoStage,
	kdigoStageFromHistory,
	kineticGfr,
	roundDoseMg,
	roundIntervalH,
	type AgentParams,
	type DoseBand
} from '../../../src/lib/clinical';
import agentsFile from '../../../fixtures/agents.json';
import { expectClose } from './helpers';

const at = new Date('2025-03-10T08:00:00Z');
const hoursBefore = (h: number) => new Date(at.getTime() - h * 3_600_000);
const mg = (value: number) => ({ value, unit: 'mg/dL' as const });
const umol = (value: number) => ({ value, unit: 'umol/L' as const });

describe('KDIGO stage from a creatinine history (KDIGO AKI Work Group, Kidney Int Suppl 2012;2:1–138)', () => {
	it('baseline is the lowest result of the last 7 days; later results are ignored; order does not matter', () => {
		// window: −168 h..0; 0.6 at −200 h is outside; 5.0 after `at` is ignored. Baseline 1.0, current 1.6 (× 1.6)
		// 48-h rise: 1.2 (−30 h) → 1.6 (−5 h) = 0.4 → stage 1
		const r = kdigoStageFromHistory(
			[
				{ at: hoursBefore(-5), creatinine: mg(5.0) },
				{ at: hoursBefore(5), creatinine: mg(1.6) },
				{ at: hoursBefore(200), creatinine: mg(0.6) },
				{ at: hoursBefore(30), creatinine: mg(1.2) },
				{ at: hoursBefore(100), creatinine: mg(1.0) }
			],
			at
		);
		expect(r.stage).toBe(1);
		expectClose(r.baseline!.value, 1.0);
		expectClose(r.current!.value, 1.6);
		expectClose(r.riseWithin48h!.value, 0.4);
		expect(r.fallWithin48h!.value).toBe(0);
	});

	it('the 48-h rule includes a pair exactly 48 h apart and excludes one 48.1 h apart', () => {
		// 1.0 → 1.3: rise 0.3, ratio 1.3 < 1.5, so only the 48-h rule can make it AKI
		expect(
			kdigoStageFromHistory(
				[
					{ at: hoursBefore(50), creatinine: mg(1.0) },
					{ at: hoursBefore(2), creatinine: mg(1.3) }
				],
				at
			).stage
		).toBe(1);
		expect(
			kdigoStageFromHistory(
				[
					{ at: hoursBefore(50.1), creatinine: mg(1.0) },
					{ at: hoursBefore(2), creatinine: mg(1.3) }
				],
				at
			).stage
		).toBe(0);
	});

	it('µmol/L thresholds: a 26.5 µmol/L rise counts although 26.5 / 88.4 is 0.2998 mg/dL', () => {
		expect(kdigoStage({ baseline: umol(80), current: umol(106.5), riseWithin48h: umol(26.5) })).toBe(1);
		expect(kdigoStage({ baseline: umol(80), current: umol(106), riseWithin48h: umol(26) })).toBe(0);
	});

	it('ratio edges 1.5, 2.0, 3.0 are inclusive despite binary rounding (1.5 × 0.8 = 1.2000000000000002)', () => {
		expect(kdigoStage({ baseline: mg(0.8), current: mg(1.2), riseWithin48h: mg(0) })).toBe(1);
		expect(kdigoStage({ baseline: mg(0.7), current: mg(1.4), riseWithin48h: mg(0) })).toBe(2);
		expect(kdigoStage({ baseline: mg(0.7), current: mg(2.1), riseWithin48h: mg(0) })).toBe(3);
		expect(kdigoStage({ baseline: mg(1.0), current: mg(1.49), riseWithin48h: mg(0.29) })).toBe(0);
	});

	it('SCr ≥ 4.0 mg/dL gives stage 3 only when an AKI criterion is met (common practice)', () => {
		// baseline 3.0 → 4.0 is × 1.33; without a 48-h rise ≥ 0.3 it is not AKI; with one it is stage 3
		expect(kdigoStage({ baseline: mg(3.0), current: mg(4.0), riseWithin48h: mg(0.2) })).toBe(0);
		expect(kdigoStage({ baseline: mg(3.0), current: mg(4.0), riseWithin48h: mg(0.5) })).toBe(3);
		expect(kdigoStage({ baseline: umol(265.2), current: umol(353.6), riseWithin48h: umol(44.2) })).toBe(3);
	});

	it('no results → stage 0 and nulls; a malformed result names its index', () => {
		expect(kdigoStageFromHistory([], at)).toEqual({ stage: 0, baseline: null, current: null, riseWithin48h: null, fallWithin48h: null });
		try {
			kdigoStageFromHistory(
				[
					{ at: hoursBefore(1), creatinine: mg(1) },
					{ at: hoursBefore(2), creatinine: mg(-1) }
				],
				at
			);
			throw new Error('should have thrown');
		} catch (e) {
			expect(e).toBeInstanceOf(ClinicalInputError);
			expect((e as ClinicalInputError).input).toBe('results[1].creatinine.value');
		}
	});
});

describe('kinetic GFR (Chen S, J Am Soc Nephrol 2013;24:877–888)', () => {
	const base = { steadyStateCreatinine: mg(1.0), steadyStateCrclMlMin: 100 };

	it('creatinine doubling 1.0 → 2.0 in 24 h with MaxΔ 1.5 mg/dL/d → 22.2 mL/min (worked by hand)', () => {
		// (1.0 × 100 / 1.5) × (1 − 24 × 1.0 / (24 × 1.5)) = 66.667 × 0.33333 = 22.222
		expectClose(kineticGfr({ ...base, firstCreatinine: mg(1.0), secondCreatinine: mg(2.0), intervalH: 24, maxRiseMgDlPerDay: 1.5 }), 22.222);
	});

	it('identities of the formula: unchanged creatinine at baseline returns CrCl_ss; a rise at MaxΔ returns 0', () => {
		expectClose(kineticGfr({ ...base, firstCreatinine: mg(1.0), secondCreatinine: mg(1.0), intervalH: 12, maxRiseMgDlPerDay: 2 }), 100, 1e-12);
		expect(kineticGfr({ ...base, firstCreatinine: mg(1.0), secondCreatinine: mg(2.0), intervalH: 12, maxRiseMgDlPerDay: 2 })).toBe(0);
		expect(kineticGfr({ ...base, firstCreatinine: mg(1.0), secondCreatinine: mg(3.0), intervalH: 12, maxRiseMgDlPerDay: 2 })).toBe(0);
	});

	it('falling creatinine gives more than SSPCr × CrCl_ss / MeanPCr (recovery)', () => {
		// (1.0 × 100 / 2.5) × (1 + 24 × 1.0 / (24 × 2)) = 40 × 1.5 = 60
		expectClose(kineticGfr({ ...base, firstCreatinine: mg(3.0), secondCreatinine: mg(2.0), intervalH: 24, maxRiseMgDlPerDay: 2 }), 60);
	});

	it('MaxΔPCr/day from production and body water: 1.0 mg/dL × 100 mL/min, 70 kg → 3.43 mg/dL/d', () => {
		// 1.0 mg/dL × 100 mL/min = 1 mg/min = 1440 mg/d over 0.6 × 70 L = 420 dL → 3.4286 (body water 0.6 L/kg from memory)
		expectClose(creatinineMaxRisePerDay({ ...base, weightKg: 70 }), 3.4286);
	});
});

describe('regimen helpers (common practice)', () => {
	it('intervals round to 6/8/12/18/24/36/48/72 h on a log scale', () => {
		expect(roundIntervalH(4)).toBe(6);
		expect(roundIntervalH(9.7)).toBe(8);
		expect(roundIntervalH(9.9)).toBe(12);
		expect(roundIntervalH(21.9)).toBe(24);
		expect(roundIntervalH(20.7)).toBe(18);
		expect(roundIntervalH(40)).toBe(36);
		expect(roundIntervalH(115.9)).toBe(72);
	});

	it('doses round to practical steps and never to zero', () => {
		expect(roundDoseMg(3)).toBe(5);
		expect(roundDoseMg(12)).toBe(10);
		expect(roundDoseMg(91)).toBe(90);
		expect(roundDoseMg(449.95)).toBe(450);
		expect(roundDoseMg(863.3)).toBe(850);
		expect(roundDoseMg(1365)).toBe(1250);
		expect(roundDoseMg(3375)).toBe(3500);
	});

	it('bands are half-open [min, max) and labelled with integer bounds', () => {
		const bands: DoseBand[] = [
			{ minCrclMlMin: 60, maxCrclMlMin: null, doseMg: 1, doseMgPerKg: null, intervalH: 24, note: null },
			{ minCrclMlMin: 20, maxCrclMlMin: 60, doseMg: 1, doseMgPerKg: null, intervalH: 36, note: null },
			{ minCrclMlMin: null, maxCrclMlMin: 20, doseMg: null, doseMgPerKg: null, intervalH: null, note: 'level-guided' }
		];
		expect(findBand(bands, 60)).toBe(bands[0]);
		expect(findBand(bands, 59.99)).toBe(bands[1]);
		expect(findBand(bands, 20)).toBe(bands[1]);
		expect(findBand(bands, 19.99)).toBe(bands[2]);
		expect(bands.map(bandLabel)).toEqual(['CrCl ≥ 60 mL/min', 'CrCl 20–59 mL/min', 'CrCl < 20 mL/min']);
	});

	it('daily-dose comparison: within ±20 % on a log scale', () => {
		expect(compareDailyDose(1200, 1000)).toBe('within');
		expect(compareDailyDose(1201, 1000)).toBe('above');
		expect(compareDailyDose(1000 / 1.2, 1000)).toBe('within');
		expect(compareDailyDose(830, 1000)).toBe('below');
	});

	it('AUC24 = F × daily dose / CL (F10)', () => {
		expectClose(auc24({ dailyDoseMg: 2000, clearanceLPerH: 4 }), 500);
		expectClose(auc24({ dailyDoseMg: 2000, clearanceLPerH: 4, bioavailability: 0.5 }), 250);
	});
});

describe('albumin model for highly bound agents (clinical-reference F16, §4; Øie–Tozer 1979, from memory)', () => {
	const common = { clearanceLPerH: 2, renalClearanceLPerH: 1, volumeL: 10, weightKg: 70, crclMlMin: 100, fuRef: 0.1 };

	it('albumin at or above the reference changes nothing (conservative)', () => {
		const r = albuminAdjustedKinetics({ ...common, fuNew: 0.08 });
		expect(r.fuRatioApplied).toBe(1);
		expectClose(r.clearanceLPerH, 2, 1e-12);
		expectClose(r.volumeL, 10, 1e-12);
	});

	it('the fu ratio is capped at 2', () => {
		// fu 0.05 → 0.1739 at 10 g/L is × 3.48; applied × 2
		const r = albuminAdjustedKinetics({ ...common, fuRef: 0.05, fuNew: 1 / (1 + 19 * 0.25) });
		expectClose(r.fuRatio, 3.4783);
		expect(r.fuRatioApplied).toBe(2);
	});

	it('secreted renal clearance is held; filtered and non-renal parts scale with fu', () => {
		// filterable = 0.1 × 100 × 0.06 = 0.6 L/h of the 1 L/h renal CL → secreted 0.4; non-renal 1.0
		// fu ratio 1.5: CL = 0.4 + (0.6 + 1.0) × 1.5 = 2.8 L/h
		// Vd: Vp(1+R) = 3 × 2.4 = 7.2 L, Ve − R·Vp = 7.8 L (70 kg); tissue = 10 − 7.2 − 0.78 = 2.02 L
		//     Vd = 7.2 + 7.8 × 0.15 + 2.02 × 1.5 = 11.4 L (× 1.14 for fu × 1.5)
		const r = albuminAdjustedKinetics({ ...common, fuNew: 0.15 });
		expectClose(r.filteredLPerH, 0.6);
		expectClose(r.secretedLPerH, 0.4);
		expectClose(r.clearanceLPerH, 2.8);
		expect(r.volumeModel).toBe('oie-tozer');
		expectClose(r.volumeL, 11.4);
	});

	it('a reference Vd below the extracellular terms is scaled instead', () => {
		// Vd 5 L < 7.98 L: Vd = 5 × (7.2 + 7.8 × 0.2) / (7.2 + 7.8 × 0.1) = 5 × 8.76 / 7.98 = 5.4887 L
		const r = albuminAdjustedKinetics({ ...common, volumeL: 5, fuNew: 0.2 });
		expect(r.volumeModel).toBe('scaled-extracellular');
		expectClose(r.volumeL, 5.4887);
	});
});

describe('assess() details', () => {
	const meropenem = (agentsFile.agents as unknown as AgentParams[]).find((a) => a.name === 'Meropenem')!;

	it('a height below 152.4 cm is flagged as outside Devine’s range in the trace', () => {
		const r = assess({
			at,
			patient: { ageYears: 70, sex: 'female', heights: [{ at: hoursBefore(5), cm: 148 }], weights: [{ at: hoursBefore(5), kg: 45 }] },
			creatinine: [{ at: hoursBefore(5), creatinine: mg(0.8) }],
			albumin: [{ at: hoursBefore(5), gL: 35 }],
			agent: meropenem,
			order: { doseMg: 1000, intervalH: 8, infusionH: 0.5, route: 'iv', startAt: hoursBefore(10) }
		});
		// IBW = 45.5 + 2.3 × (148/2.54 − 60) = 45.5 − 3.984 = 41.516 kg (extrapolated)
		expectClose(r.covariates.idealBodyWeightKg!, 41.516);
		expect(r.trace.find((s) => s.key === 'ibw')!.note).toContain('low confidence');
	});

	it('creatinine floor (setting) raises a low SCr for Cockcroft–Gault only (Reichley 1995)', () => {
		const input = {
			at,
			patient: { ageYears: 85, sex: 'female' as const, heights: [{ at: hoursBefore(5), cm: 160 }], weights: [{ at: hoursBefore(5), kg: 50 }] },
			creatinine: [{ at: hoursBefore(5), creatinine: mg(0.5) }],
			albumin: [{ at: hoursBefore(5), gL: 35 }],
			agent: meropenem,
			order: { doseMg: 1000, intervalH: 8, infusionH: 0.5, route: 'iv' as const, startAt: hoursBefore(10) }
		};
		// dosing weight = actual 50 kg (< IBW 52.38); CG = 55 × 50 / (72 × SCr) × 0.85
		expectClose(assess(input).renal.crclMlMin!, (55 * 50 * 0.85) / (72 * 0.5));
		const floored = assess({ ...input, settings: { scrFloorMgDl: 1.0 } });
		expectClose(floored.renal.crclMlMin!, (55 * 50 * 0.85) / 72);
		expect(floored.trace.find((s) => s.key === 'scrFloor')!.source).toContain('Reichley');
		expect(floored.renal.egfrIndexed).toBe(assess(input).renal.egfrIndexed);
	});
});

describe('concentrationCurve input checks', () => {
	it('names the faulty input', () => {
		const ok = { regimen: { doseMg: 100, intervalH: 8, infusionH: 0.5 }, kPerH: 0.1, volumeL: 10, fromH: 0, toH: 24, stepH: 1 };
		expect(concentrationCurve(ok)).toHaveLength(25);
		const cases: [object, string][] = [
			[{ ...ok, stepH: 0 }, 'stepH'],
			[{ ...ok, toH: -1 }, 'toH'],
			[{ ...ok, regimen: { ...ok.regimen, infusionH: 9 } }, 'regimen.infusionH'],
			[{ ...ok, kPerH: Number.NaN }, 'kPerH'],
			[{ ...ok, stepH: 1e-6 }, 'stepH']
		];
		for (const [args, name] of cases) {
			expect(() => concentrationCurve(args as typeof ok)).toThrow(ClinicalInputError);
			try {
				concentrationCurve(args as typeof ok);
			} catch (e) {
				expect((e as ClinicalInputError).input).toBe(name);
			}
		}
	});
});
