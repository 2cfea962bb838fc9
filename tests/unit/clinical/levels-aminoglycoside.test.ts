// Aminoglycoside kinetics from two measured levels (Sawchuk–Zaske) and the regimen proposed from them.
import { describe, expect, it } from 'vitest';
import { aminoglycosideTwoLevels, PRACTICAL_INTERVALS_H, type Administration, type AgentParams, type DrugLevel } from '../../../src/lib/clinical';
import { expectClose } from './helpers';
import { atH, libraryAgent, simulate, type SimDose } from './levels-helpers';

const gentamicin = libraryAgent('Gentamicin');
const given = (doses: SimDose[]): Administration[] => doses.map((d) => ({ startAt: atH(d.startH), endAt: atH(d.startH + d.durationH), doseMg: d.doseMg }));
const level = (h: number, mgL: number, timing: DrugLevel['timing'] = 'random'): DrugLevel => ({ at: atH(h), mgL, timing });

describe('published worked example', () => {
	// Bauer LA, Applied Clinical Pharmacokinetics, 2nd ed., McGraw-Hill 2008, chapter 4 "The Aminoglycoside
	// Antibiotics", Sawchuk–Zaske method, example 1 (about p. 140; page number, patient details and every value
	// below from memory, not confirmed against the book): a 70-kg man receiving gentamicin 170 mg every 24 h
	// as 1-h infusions; at steady state the trough before a dose was 1.8 mg/L and the peak at the end of that
	// infusion 10 mg/L. At steady state the trough before the next dose is the same 1.8 mg/L, which is how the
	// book pairs them: k = ln(Cmax/Cmin)/(τ − t′).
	const doses: SimDose[] = [0, 24, 48].map((startH) => ({ startH, durationH: 1, doseMg: 170 }));
	const result = aminoglycosideTwoLevels({
		at: atH(72),
		agent: gentamicin,
		administrations: given(doses),
		levels: [level(48, 1.8, 'trough'), level(49, 10, 'peak'), level(72, 1.8, 'trough')],
		schedule: { startAt: atH(0), intervalH: 24, doseMg: 170, infusionH: 1, stopAt: atH(72) },
		weightKg: 70,
		targets: { peakMgL: 8, troughMgL: 1 }
	});

	it('k, t½ and Vd as the book gives them', () => {
		const k = result.kinetics;
		expect(k).not.toBeNull();
		expectClose(k!.kPerH, 0.0746); // from memory
		expectClose(k!.halfLifeH, 9.29); // "9.3 h", from memory
		expectClose(k!.volumeL, 19.7); // from memory
		expect(result.used.map((l) => l.mgL)).toEqual([1.8, 10, 1.8]);
		expect(result.preDoseMgL).toBe(1.8);
	});

	it("the interval the targets need is the book's ≈ 29 h, rounded up so the trough stays under 1 mg/L", () => {
		const k = result.kinetics!.kPerH;
		expectClose(1 + Math.log(8 / 1) / k, 28.9, 0.005); // τ = t′ + ln(Cmax/Cmin)/k, "29 h" from memory
		const p = result.proposal.proposed!;
		expect(p.intervalH).toBe(36);
		expect(p.predicted!.troughMgL!).toBeLessThanOrEqual(1);
		expect(p.doseMg % gentamicin.doseStepMg).toBe(0);
	});
});

describe('clinical-reference A17 read backwards', () => {
	// A17: 120 mg over 0.5 h every 8 h, V 17.5 L, k 0.30 /h → Cmax,ss 7.00 mg/L, Cmin,ss 0.738 mg/L. Measured at
	// those values (pre-dose, end of infusion, before the next dose) the method must return k 0.30 and V 17.5.
	it('recovers k and Vd from the steady-state peak and trough', () => {
		const r = aminoglycosideTwoLevels({
			at: atH(80),
			agent: gentamicin,
			administrations: given(Array.from({ length: 10 }, (_, i) => ({ startH: 8 * i, durationH: 0.5, doseMg: 120 }))),
			levels: [level(72, 0.738, 'trough'), level(72.5, 7.0, 'peak'), level(80, 0.738, 'trough')],
			schedule: { startAt: atH(0), intervalH: 8, doseMg: 120, infusionH: 0.5, stopAt: atH(80) },
			weightKg: 70
		});
		expectClose(r.kinetics!.kPerH, 0.3);
		expectClose(r.kinetics!.volumeL, 17.5);
		expectClose(r.truePeakMgL!, 7.0);
		expectClose(r.trueTroughMgL!, 0.738);
	});
});

describe('levels simulated from known kinetics', () => {
	const CL = 5; // L/h
	const V = 20; // L  → k 0.25 /h
	const weightKg = 75;
	it('after the first dose: k, Vd, CL, and the extrapolated peak and trough are exact', () => {
		const doses: SimDose[] = [{ startH: 0, durationH: 0.5, doseMg: 400 }];
		const [c1, c2, peak, trough] = simulate(doses, CL, V, [1.5, 8, 0.5, 24]);
		const r = aminoglycosideTwoLevels({
			at: atH(10),
			agent: gentamicin,
			administrations: given(doses),
			levels: [level(1.5, c1, 'peak'), level(8, c2)],
			schedule: { startAt: atH(0), intervalH: 24, doseMg: 400, infusionH: 0.5 },
			weightKg
		});
		expectClose(r.kinetics!.kPerH, 0.25, 1e-9);
		expectClose(r.kinetics!.volumeL, V, 1e-9);
		expectClose(r.kinetics!.clearanceLPerH, CL, 1e-9);
		expectClose(r.kinetics!.halfLifeH, Math.LN2 / 0.25, 1e-9);
		expectClose(r.truePeakMgL!, peak, 1e-9);
		expectClose(r.trueTroughMgL!, trough, 1e-9);
		expect(r.preDoseMgL).toBe(0);
		expectClose(r.volumePerKg!, V / weightKg, 1e-9);
	});

	it('after the third of irregular doses, with and without a pre-dose level, Vd is exact (earlier doses superposed)', () => {
		const doses: SimDose[] = [
			{ startH: 0, durationH: 0.5, doseMg: 400 },
			{ startH: 7, durationH: 1, doseMg: 300 },
			{ startH: 15.5, durationH: 0.5, doseMg: 350 }
		];
		const [pre, c1, c2] = simulate(doses, CL, V, [15, 17, 22]);
		const base = {
			at: atH(23),
			agent: gentamicin,
			administrations: given(doses),
			schedule: { startAt: atH(0), intervalH: 8, doseMg: 350, infusionH: 0.5 },
			weightKg
		};
		const without = aminoglycosideTwoLevels({ ...base, levels: [level(17, c1), level(22, c2)] });
		expectClose(without.kinetics!.volumeL, V, 1e-9);
		expectClose(without.preDoseMgL!, simulate(doses, CL, V, [15.5])[0], 1e-9);
		expect(without.trace.find((s) => s.key === 'agPreDose')!.note).toMatch(/predicted from the 2 earlier doses/);
		const withPre = aminoglycosideTwoLevels({ ...base, levels: [level(15, pre, 'trough'), level(17, c1), level(22, c2)] });
		expectClose(withPre.kinetics!.volumeL, V, 1e-9);
		expect(withPre.used).toHaveLength(3);
	});
});

describe("the proposal to the agent's targets", () => {
	/** Steady-state peak and trough of an intermittent infusion, written here from F12 (not the code's). */
	function steadyState(doseMg: number, tinf: number, tau: number, v: number, k: number) {
		const peak = ((doseMg / tinf) * (1 - Math.exp(-k * tinf))) / (k * v * (1 - Math.exp(-k * tau)));
		return { peak, trough: peak * Math.exp(-k * (tau - tinf)) };
	}

	it.each([
		{ CL: 6, V: 18 }, // fast clearance
		{ CL: 2.5, V: 20 },
		{ CL: 1.5, V: 25 } // slow clearance: 72-h interval
	])('uses the library targets (peak 20, trough ≤ 1 mg/L): %o', ({ CL, V }) => {
		const weightKg = 70;
		const doses: SimDose[] = [{ startH: 0, durationH: 0.5, doseMg: 420 }];
		const [c1, c2] = simulate(doses, CL, V, [1.5, 9]);
		const r = aminoglycosideTwoLevels({
			at: atH(10),
			agent: gentamicin,
			administrations: given(doses),
			levels: [level(1.5, c1), level(9, c2)],
			schedule: { startAt: atH(0), intervalH: 24, doseMg: 420, infusionH: 0.5 },
			weightKg
		});
		expect(r.targets).toEqual({ peakMgL: 20, troughMgL: 1 });
		const p = r.proposal.proposed;
		expect(p, r.proposal.reason ?? '').not.toBeNull();
		expect((PRACTICAL_INTERVALS_H as readonly number[]).includes(p!.intervalH)).toBe(true);
		expect(p!.doseMg % 20).toBe(0);
		const ss = steadyState(p!.doseMg, p!.infusionH, p!.intervalH, V, CL / V);
		expect(ss.trough).toBeLessThanOrEqual(1 + 1e-9);
		// the peak lands within the rounding of the dose: half a step, or one and a half when a step down kept the trough under its limit
		const stepPeak = steadyState(gentamicin.doseStepMg, p!.infusionH, p!.intervalH, V, CL / V).peak;
		expect(Math.abs(ss.peak - 20)).toBeLessThanOrEqual(1.5 * stepPeak);
		expect((p!.doseMg * 24) / p!.intervalH).toBeLessThanOrEqual(7 * weightKg * 1.005); // usual maximum 7 mg/kg/day
		expect(p!.loadingDoseMg).toBeNull();
	});

	it('absent with the reason when the trough limit would need an interval beyond 72 h', () => {
		const doses: SimDose[] = [{ startH: 0, durationH: 0.5, doseMg: 400 }];
		const [c1, c2] = simulate(doses, 0.2, 20, [2, 20]); // k 0.01 /h, t½ 69 h
		const r = aminoglycosideTwoLevels({
			at: atH(21),
			agent: gentamicin,
			administrations: given(doses),
			levels: [level(2, c1), level(20, c2)],
			schedule: { startAt: atH(0), intervalH: 24, doseMg: 400, infusionH: 0.5 },
			weightKg: 70
		});
		expect(r.kinetics).not.toBeNull();
		expect(r.proposal.proposed).toBeNull();
		expect(r.proposal.reason).toMatch(/^level-guided: .* beyond 72 h/);
	});

	it('absent with the reason when the agent has no targets', () => {
		const noTargets: AgentParams = { ...gentamicin, peakTargetMgL: null, troughMaxMgL: null };
		const doses: SimDose[] = [{ startH: 0, durationH: 0.5, doseMg: 400 }];
		const [c1, c2] = simulate(doses, 5, 20, [1.5, 8]);
		const r = aminoglycosideTwoLevels({
			at: atH(10),
			agent: noTargets,
			administrations: given(doses),
			levels: [level(1.5, c1), level(8, c2)],
			schedule: { startAt: atH(0), intervalH: 24, doseMg: 400, infusionH: 0.5 },
			weightKg: 70
		});
		expect(r.kinetics).not.toBeNull();
		expect(r.proposal).toEqual({ proposed: null, reason: expect.stringMatching(/no peak target or trough limit/) });
	});
});

describe('levels that cannot be used', () => {
	const doses: SimDose[] = [
		{ startH: 0, durationH: 1, doseMg: 400 },
		{ startH: 24, durationH: 1, doseMg: 400 }
	];
	const base = {
		at: atH(40),
		agent: gentamicin,
		administrations: given(doses),
		schedule: { startAt: atH(0), intervalH: 24, doseMg: 400, infusionH: 1 },
		weightKg: 70
	};

	it('a trough drawn during an infusion and a level before the first dose are marked with the reason', () => {
		const [c1, c2] = simulate(doses, 5, 20, [26, 33]);
		const r = aminoglycosideTwoLevels({ ...base, levels: [level(-2, 0.5), level(24.5, 3, 'trough'), level(26, c1), level(33, c2)] });
		expect(r.kinetics).not.toBeNull();
		expectClose(r.kinetics!.kPerH, 0.25, 1e-9);
		const reasons = r.excluded.map((e) => e.reason);
		expect(reasons).toContain('drawn before the first dose');
		expect(reasons.some((x) => /^labelled trough but drawn during the infusion started/.test(x))).toBe(true);
		expect(r.trace.filter((s) => s.key === 'levelExcluded')).toHaveLength(2);
	});

	it('one level after a dose is not enough for an agent the library does not read from one level: no kinetics, the reason, and the level kept with it', () => {
		const twoLevelsOnly: AgentParams = { ...gentamicin, singleLevelExtendedInterval: false };
		const r = aminoglycosideTwoLevels({ ...base, agent: twoLevelsOnly, levels: [level(26, 10)] });
		expect(r.kinetics).toBeNull();
		expect(r.method).toBeNull();
		expect(r.reason).toMatch(/two levels drawn after the end of the same infusion/);
		expect(r.proposal.proposed).toBeNull();
		expect(r.excluded).toHaveLength(1);
	});

	it('two levels that do not fall give no k', () => {
		const r = aminoglycosideTwoLevels({ ...base, levels: [level(26, 5), level(33, 6)] });
		expect(r.kinetics).toBeNull();
		expect(r.reason).toMatch(/not lower than the earlier one/);
	});
});

describe('extended-interval dosing read from one level (population volume)', () => {
	// Check values computed here from the one-compartment model (common practice: with one level and the
	// population volume, k is the rate at which the doses given reach the measured level).
	const weightKg = 70;
	const populationVolumeL = gentamicin.vdLPerKg * weightKg; // 0.26 L/kg × 70 kg = 18.2 L
	const doses: SimDose[] = [0, 24, 48].map((startH) => ({ startH, durationH: 0.5, doseMg: 420 }));
	const base = {
		at: atH(62),
		agent: gentamicin,
		administrations: given(doses),
		schedule: { startAt: atH(0), intervalH: 24, doseMg: 420, infusionH: 0.5 },
		weightKg
	};

	it('recovers k and CL exactly when the patient has the population volume, with the true peak and trough predicted', () => {
		for (const clearanceLPerH of [1.5, 3, 5.5]) {
			const [c] = simulate(doses, clearanceLPerH, populationVolumeL, [58]);
			const r = aminoglycosideTwoLevels({ ...base, levels: [level(58, c)] });
			expect(r.method).toBe('single-level');
			expectClose(r.kinetics!.clearanceLPerH, clearanceLPerH, 1e-6);
			expectClose(r.kinetics!.volumeL, populationVolumeL, 1e-12);
			const [peak, trough] = simulate(doses, clearanceLPerH, populationVolumeL, [48.5, 72]);
			expectClose(r.truePeakMgL!, peak, 1e-6);
			expectClose(r.trueTroughMgL!, trough, 1e-5);
			expect(r.used).toHaveLength(1);
			expect(r.trace.map((s) => s.key)).toEqual(expect.arrayContaining(['agVolume', 'agK', 'agClearance', 'agProposal']));
			// a proposal from one level obeys the same invariants as any other, or is absent with the reason
			expect(r.proposal.proposed !== null || (r.proposal.reason ?? '').length > 0).toBe(true);
			if (r.proposal.proposed) expect(r.proposal.proposed.predicted!.troughMgL).toBeLessThanOrEqual(gentamicin.troughMaxMgL!);
		}
	});

	it('a patient whose volume differs from the population: k still reproduces the level, the trace says the volume is the population’s', () => {
		const [c] = simulate(doses, 3, 25, [58]);
		const r = aminoglycosideTwoLevels({ ...base, levels: [level(58, c)] });
		expect(r.method).toBe('single-level');
		const [again] = simulate(doses, r.kinetics!.clearanceLPerH, r.kinetics!.volumeL, [58]);
		expectClose(again, c, 1e-6);
		expect(r.trace.find((s) => s.key === 'agVolume')!.note).toMatch(/population value/);
	});

	it('not for doses more often than every 24 h, nor without the weight, nor for a level no dose could reach', () => {
		const q12: SimDose[] = [0, 12, 24, 36].map((startH) => ({ startH, durationH: 0.5, doseMg: 200 }));
		const [c12] = simulate(q12, 3, populationVolumeL, [40]);
		const r12 = aminoglycosideTwoLevels({
			...base,
			at: atH(44),
			administrations: given(q12),
			schedule: { startAt: atH(0), intervalH: 12, doseMg: 200, infusionH: 0.5 },
			levels: [level(40, c12)]
		});
		expect(r12.kinetics).toBeNull();
		expect(r12.reason).toMatch(/extended-interval dose/);

		const [c] = simulate(doses, 3, populationVolumeL, [58]);
		expect(aminoglycosideTwoLevels({ ...base, weightKg: null, levels: [level(58, c)] }).reason).toMatch(/weight is unknown/);
		const tooHigh = aminoglycosideTwoLevels({ ...base, levels: [level(58, 80)] });
		expect(tooHigh.kinetics).toBeNull();
		expect(tooHigh.reason).toMatch(/above what the doses given could reach/);
	});
});
