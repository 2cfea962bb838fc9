// assess() with measured levels: the measured section stored with the assessment, the proposal from the
// patient's own kinetics, the fit's steps in the trace (and again when re-run from the stored inputs), the
// facts the rules read, and — over the agent library — a level-based proposal that is safe or absent with a reason.
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import {
	concentrationAtMs,
	assess,
	BUELGA_2005,
	levelReference,
	predictExposure,
	proposalViolations,
	reviveAssessInput,
	storeAssessInput,
	usesMeasuredLevels,
	type AgentParams,
	type AssessInput,
	type DrugLevel
} from '../../../src/lib/clinical';
import { buildFacts, DEFAULT_RULES, evaluateRules } from '../../../src/lib/rules';
import agentsFile from '../../../fixtures/agents.json';
import { atH, libraryAgent, simulate, type SimDose } from './levels-helpers';

const vancomycin = libraryAgent('Vancomycin');
const gentamicin = libraryAgent('Gentamicin');
const AGE = 60;

/** Creatinine giving this Cockcroft–Gault CrCl for a man of this weight (Cockcroft DW, Gault MH, Nephron 1976;16:31–41). */
const creatinineFor = (weightKg: number, crclMlMin: number) => ((140 - AGE) * weightKg) / (72 * crclMlMin);

type Scenario = {
	agent: AgentParams;
	weightKg: number;
	crclMlMin: number;
	doseMg: number;
	intervalH: number;
	infusionH: number;
	/** doses given before the assessment */
	doses: number;
	clearanceLPerH: number;
	volumeL: number;
	/** hours after the first dose */
	levelsAtH: { h: number; timing: DrugLevel['timing'] }[];
	atH: number;
};

function scenario(s: Scenario, withDosing = true): AssessInput {
	const given: SimDose[] = Array.from({ length: s.doses }, (_, i) => ({ startH: i * s.intervalH, durationH: s.infusionH, doseMg: s.doseMg }));
	const mgL = simulate(
		given,
		s.clearanceLPerH,
		s.volumeL,
		s.levelsAtH.map((l) => l.h)
	);
	const scr = creatinineFor(s.weightKg, s.crclMlMin);
	return {
		at: atH(s.atH),
		patient: { ageYears: AGE, sex: 'male', heights: [], weights: [{ at: atH(-24), kg: s.weightKg }] },
		creatinine: [
			{ at: atH(-20), creatinine: { value: scr, unit: 'mg/dL' } },
			{ at: atH(s.atH - 6), creatinine: { value: scr, unit: 'mg/dL' } }
		],
		albumin: [{ at: atH(s.atH - 6), gL: 40 }],
		agent: s.agent,
		order: { doseMg: s.doseMg, intervalH: s.intervalH, infusionH: s.infusionH, route: 'iv', startAt: atH(0) },
		...(withDosing
			? {
					administrations: given.map((d) => ({ startAt: atH(d.startH), endAt: atH(d.startH + d.durationH), doseMg: d.doseMg })),
					levels: s.levelsAtH.map((l, i) => ({ at: atH(l.h), mgL: mgL[i], timing: l.timing }))
				}
			: {})
	};
}

// A 70-kg man, CrCl 78 mL/min: Buelga's prior CL = 1.08 × 78 × 0.06 = 5.05 L/h, V = 0.98 × 70 = 68.6 L.
// His own clearance is half of that: 1,000 mg q12h gives him an AUC24 near 2,000 / 2.5 = 800 mg·h/L.
const slowVancomycin: Scenario = {
	agent: vancomycin,
	weightKg: 70,
	crclMlMin: 78,
	doseMg: 1000,
	intervalH: 12,
	infusionH: 1.5,
	doses: 5,
	clearanceLPerH: 2.5,
	volumeL: 60,
	levelsAtH: [
		{ h: 47.5, timing: 'trough' },
		{ h: 51, timing: 'peak' }
	],
	atH: 53
};

describe('assess() with measured vancomycin levels and held doses', () => {
	// The same slow patient (true CL 2.5 L/h, V 60 L): four doses given, the next four held after a high trough,
	// and the drug's fall measured daily. The levels are simulated from the doses actually given.
	const givenH = [0, 12, 24, 36];
	const heldH = [48, 60, 72, 84];
	const levelsAtH = [35.5, 59.5, 83.5];
	const mgL = simulate(
		givenH.map((h) => ({ startH: h, durationH: 1.5, doseMg: 1000 })),
		2.5,
		60,
		levelsAtH
	);
	const base = scenario({ ...slowVancomycin, doses: 0, levelsAtH: [], atH: 90 });
	const withRecords = (held: boolean): AssessInput => ({
		...base,
		administrations: [
			...givenH.map((h) => ({ startAt: atH(h), endAt: atH(h + 1.5), doseMg: 1000 })),
			...(held ? heldH.map((h) => ({ startAt: atH(h), endAt: null, doseMg: 1000, notGiven: true })) : [])
		],
		levels: levelsAtH.map((h, i) => ({ at: atH(h), mgL: mgL[i], timing: i === 0 ? ('trough' as const) : ('random' as const) }))
	});

	it("recovers the patient's clearance when the held doses are recorded as not given (common practice: a held dose is not given)", () => {
		const m = assess(withRecords(true)).measured;
		expect(m?.individual?.clearanceLPerH).toBeGreaterThan(2.5 * 0.8);
		expect(m?.individual?.clearanceLPerH).toBeLessThan(2.5 * 1.2);
	});

	it('without those records assumes the held doses given, which overstates clearance (the reason to record them)', () => {
		const a = assess(withRecords(false));
		expect(a.measured?.individual?.clearanceLPerH).toBeGreaterThan(2.5 * 1.3);
		expect(a.trace.find((s) => s.key === 'dosingHistory')?.note).toContain('4 scheduled doses with no recorded administration assumed given');
	});
});

describe('assess() with measured vancomycin levels', () => {
	const input = scenario(slowVancomycin);
	const a = assess(input);

	it("stores the patient's own clearance, AUC24 now and the statement of how far the levels moved it", () => {
		const m = a.measured;
		expect(m?.method).toBe('vancomycin-map');
		expect(m?.levelCount).toBe(2);
		expect(m?.latestLevelAt).toEqual(atH(51));
		expect(m?.administrationCount).toBe(5);
		expect(m?.prior?.clearanceLPerH).toBeCloseTo(1.08 * 78 * 0.06, 1);
		// two precise levels move clearance most of the way from 5.05 to the true 2.5 L/h
		expect(m?.individual?.clearanceLPerH).toBeGreaterThan(2.2);
		expect(m?.individual?.clearanceLPerH).toBeLessThan(3.2);
		expect(m?.auc24MgHL).toBeCloseTo(2000 / (m?.individual?.clearanceLPerH as number), 6);
		expect(m?.statement).toMatch(/2 levels moved clearance from 5\.05 to/);
		expect(m?.fitted).toHaveLength(2);
		expect(m?.excluded).toEqual([]);
	});

	it('withholds any regimen while his own kinetics put the next trough above 20 mg/L, and says to hold and re-check', () => {
		// AUC24 near 800 mg·h/L and a trough near 27 mg/L: the drug on board comes before a new regimen
		expect(a.dosing.fromLevels).toBe(true);
		expect(a.dosing.proposed).toBeNull();
		expect(a.measured?.proposed).toBeNull();
		expect(a.dosing.proposalReason).toMatch(/concentration at the next dose at \d+\.\d mg\/L, above 20 mg\/L; hold doses and re-check a level/);
		// the population estimate stays what it was: the rules' "population estimate" findings read it
		expect(a.kinetics.auc24MgHL).toBeCloseTo(assess(scenario(slowVancomycin, false)).kinetics.auc24MgHL as number, 9);
	});

	it('proposes from the individual estimate, to the AUC24 window, and says so, when the next trough is under the ceiling', () => {
		// a man clearing 6 L/h: 1,000 mg q12h gives an AUC24 near 2,000 / 6 = 333 mg·h/L and troughs under 10 mg/L
		const fast = assess(scenario({ ...slowVancomycin, clearanceLPerH: 6 }));
		expect(fast.dosing.fromLevels).toBe(true);
		expect(fast.dosing.proposed).toEqual(fast.measured?.proposed);
		const p = fast.dosing.proposed;
		expect(p).not.toBeNull();
		const auc = (p!.doseMg * 24) / p!.intervalH / (fast.measured?.individual?.clearanceLPerH as number);
		expect(auc).toBeGreaterThanOrEqual(400);
		expect(auc).toBeLessThanOrEqual(600);
		expect(fast.trace.find((s) => s.key === 'proposed')?.note).toMatch(/individual kinetics of the measured levels/);
	});

	it('shows the fit in the trace: the prior, the objective, the estimates and a residual per level', () => {
		const keys = a.trace.map((s) => s.key);
		for (const k of [
			'measuredLevels',
			'dosingHistory',
			'levelPriorClearance',
			'levelObjective',
			'levelMapClearance',
			'levelMapVolume',
			'levelAuc24Current',
			'levelProposal'
		])
			expect(keys, k).toContain(k);
		expect(keys.filter((k) => k === 'levelResidual')).toHaveLength(2);
		expect(a.trace.find((s) => s.key === 'levelPriorClearance')?.source).toBe(BUELGA_2005.citation);
	});

	it('gives the same result and trace when re-run from the stored inputs (JSON and back)', () => {
		const stored = JSON.parse(JSON.stringify(storeAssessInput(input)));
		expect(stored.levels).toHaveLength(2);
		expect(stored.administrations).toHaveLength(5);
		const again = assess(reviveAssessInput(stored));
		expect(JSON.parse(JSON.stringify(again))).toEqual(JSON.parse(JSON.stringify(a)));
	});

	it('hands the rules the measured trough, its population prediction and the AUC from levels', () => {
		const facts = buildFacts({
			assessment: JSON.parse(JSON.stringify(a)),
			agent: { code: vancomycin.code, name: vancomycin.name, agentClass: 'glycopeptide', params: vancomycin },
			order: input.order
		});
		expect(facts.dosedByLevels).toBe(true);
		expect(facts.measuredLevelCount).toBe(2);
		expect(facts.measuredTroughMgL).toBeCloseTo(input.levels![0].mgL, 9);
		expect(facts.measuredTroughAgeH).toBeCloseTo(53 - 47.5, 9);
		expect(facts.measuredTroughPredictedMgL).toBeGreaterThan(0);
		expect(facts.measuredTroughRatio).toBeCloseTo(facts.measuredTroughMgL! / facts.measuredTroughPredictedMgL!, 9);
		expect(facts.measuredAuc24MgHL).toBeGreaterThan(600);
		const held = evaluateRules(DEFAULT_RULES, facts).filter((o) => o.status === 'holds');
		expect(held.map((o) => o.key)).toContain('vancomycin-measured-auc-outside-window');
		expect(held.find((o) => o.key === 'vancomycin-measured-auc-outside-window')?.severity).toBe('high');
		expect(held.map((o) => o.key)).not.toContain('vancomycin-auc-outside-target');
		expect(held.map((o) => o.key)).not.toContain('level-due');
	});
});

describe('assess() without measured levels', () => {
	it('adds nothing when levels were not given (other callers, stored inputs from before)', () => {
		const a = assess(scenario(slowVancomycin, false));
		expect(a.measured).toBeUndefined();
		expect(a.dosing.fromLevels).toBeUndefined();
		expect(a.trace.map((s) => s.key)).not.toContain('measuredLevels');
	});
	it('records that none was measured, keeps the population proposal and lets level-due fire after 72 h', () => {
		const base = scenario({ ...slowVancomycin, atH: 80 }, false);
		const a = assess({ ...base, levels: [], administrations: [] });
		expect(a.measured?.levelCount).toBe(0);
		expect(a.measured?.reason).toBe('no level measured');
		expect(a.dosing.proposed).toEqual(assess(base).dosing.proposed);
		const facts = buildFacts({
			assessment: a,
			agent: { code: vancomycin.code, name: vancomycin.name, agentClass: 'glycopeptide', params: vancomycin },
			order: base.order
		});
		expect(evaluateRules(DEFAULT_RULES, facts).find((o) => o.key === 'level-due')?.status).toBe('holds');
	});
	it('leaves agents not dosed from levels alone even when levels are given', () => {
		const meropenem = (agentsFile.agents as unknown as AgentParams[]).find((x) => !usesMeasuredLevels(x)) as AgentParams;
		const base = scenario({ ...slowVancomycin, agent: meropenem, doseMg: 1000, intervalH: 8, infusionH: 0.5 });
		expect(assess(base).measured).toBeUndefined();
	});
});

describe('levels at impossible times', () => {
	it('are marked with the reason, not fitted, and never the latest trough', () => {
		const input = scenario(slowVancomycin);
		input.levels!.push({ at: atH(-2), mgL: 12, timing: 'random' }, { at: atH(48.5), mgL: 30, timing: 'trough' });
		const a = assess(input);
		expect(a.measured?.excluded.map((e) => e.reason)).toEqual(['drawn before the first dose', expect.stringMatching(/during the infusion/)]);
		expect(a.measured?.fitted).toHaveLength(2);
		expect(a.measured?.latestTrough?.mgL).toBeCloseTo(input.levels![0].mgL, 9);
		expect(a.trace.filter((s) => s.key === 'levelExcluded')).toHaveLength(2);
	});
	it('on dialysis: no Bayesian estimate (the prior needs a CrCl), the reason given, the trough still read', () => {
		const input = scenario(slowVancomycin);
		input.patient.renalReplacement = [{ mode: 'ihd', from: atH(-100), to: null }];
		const a = assess(input);
		expect(a.measured?.individual).toBeNull();
		expect(a.measured?.reason).toMatch(/renal replacement/);
		expect(a.measured?.latestTrough?.mgL).toBeCloseTo(input.levels![0].mgL, 9);
		expect(a.dosing.fromLevels).toBeUndefined();
	});
});

describe('assess() with two gentamicin levels after one dose (Sawchuk–Zaske)', () => {
	// 400 mg q24h over 30 min; his own CL 3 L/h, V 20 L (k 0.15/h); levels 1 h and 8 h after the third dose's end
	const s: Scenario = {
		agent: gentamicin,
		weightKg: 70,
		crclMlMin: 60,
		doseMg: 400,
		intervalH: 24,
		infusionH: 0.5,
		doses: 3,
		clearanceLPerH: 3,
		volumeL: 20,
		levelsAtH: [
			{ h: 48 + 1.5, timing: 'peak' },
			{ h: 48 + 8.5, timing: 'random' }
		],
		atH: 58
	};
	it('recovers k and V, extrapolates the true peak and trough, and proposes to the targets', () => {
		const a = assess(scenario(s));
		const m = a.measured;
		expect(m?.method).toBe('aminoglycoside-two-level');
		expect(m?.individual?.kPerH).toBeCloseTo(0.15, 3);
		expect(m?.individual?.volumeL).toBeCloseTo(20, 0);
		expect(m?.truePeakMgL).not.toBeNull();
		expect(m?.trueTroughMgL).not.toBeNull();
		expect(a.dosing.fromLevels).toBe(true);
		if (a.dosing.proposed !== null) expect(a.dosing.proposed.predicted?.troughMgL).toBeLessThanOrEqual(gentamicin.troughMaxMgL as number);
		else expect(a.dosing.proposalReason).toBeTruthy();
		expect(a.trace.map((t) => t.key)).toContain('measuredLevels');
	});
});

describe('over the agent library (fast-check): a proposal from levels is safe or absent with a reason', () => {
	const levelAgents = (agentsFile.agents as unknown as AgentParams[]).filter(usesMeasuredLevels);
	it('every agent dosed from levels, random patients, kinetics and one to four levels', { timeout: 60_000 }, () => {
		expect(levelAgents.length).toBeGreaterThanOrEqual(4);
		const seen = { proposed: 0, absent: 0 };
		fc.assert(
			fc.property(
				fc.constantFrom(...levelAgents),
				fc.double({ min: 40, max: 160, noNaN: true }),
				fc.double({ min: 10, max: 180, noNaN: true }),
				fc.double({ min: 0.25, max: 4, noNaN: true }),
				fc.double({ min: 0.5, max: 2, noNaN: true }),
				fc.integer({ min: 1, max: 4 }),
				(agent, weightKg, crclMlMin, clearanceFactor, volumeFactor, levelCount) => {
					const vanc = agent.model === 'vancomycin';
					const intervalH = vanc ? 12 : 24;
					const infusionH = vanc ? 1.5 : 0.5;
					const doseMg = vanc ? 1000 : Math.round((agent.usualDoseMgPerKg ?? 5) * weightKg);
					const clearanceLPerH = (vanc ? 1.08 * crclMlMin * 0.06 : 0.06 * crclMlMin) * clearanceFactor;
					const volumeL = (vanc ? 0.98 : agent.vdLPerKg) * weightKg * volumeFactor;
					const last = 3 * intervalH;
					const times = [last + infusionH + 1, last + infusionH + 6, last - 0.5, last + intervalH / 2].slice(0, levelCount);
					const input = scenario({
						agent,
						weightKg,
						crclMlMin,
						doseMg,
						intervalH,
						infusionH,
						doses: 4,
						clearanceLPerH,
						volumeL,
						levelsAtH: times.map((h) => ({ h, timing: h < last ? 'trough' : 'random' })),
						atH: last + intervalH - 1
					});
					const a = assess(input);
					expect(a.measured).toBeDefined();
					if (!a.dosing.fromLevels) return;
					const p = a.dosing.proposed;
					seen[p === null ? 'absent' : 'proposed']++;
					if (p === null) {
						expect(a.dosing.proposalReason, agent.name).toMatch(/\w/);
						return;
					}
					const k = a.measured!.individual!;
					// written from the rules: dose on the step and within the largest dose; infusion inside the
					// interval and within the maximum rate; predicted exposure within the target
					expect(p.doseMg % agent.doseStepMg, agent.name).toBeCloseTo(0, 6);
					if (agent.maxDoseMg !== null) expect(p.doseMg).toBeLessThanOrEqual(agent.maxDoseMg);
					expect(p.infusionH).toBeLessThanOrEqual(p.intervalH);
					if (agent.maxInfusionRateMgPerH !== null) expect(p.doseMg / p.infusionH).toBeLessThanOrEqual(agent.maxInfusionRateMgPerH * 1.000001);
					// no regimen starts while the drug on board is above the ceiling (written from the rule: the doses
					// given, superposed at the own kinetics, at the next scheduled dose)
					const nextDoseMs = atH(4 * intervalH).getTime();
					const onBoard = concentrationAtMs(
						input.administrations!.map((d) => ({ startMs: d.startAt.getTime(), durationH: infusionH, doseMg: d.doseMg, source: 'given' as const })),
						k.kPerH,
						k.volumeL,
						nextDoseMs
					);
					expect(onBoard, agent.name).toBeLessThanOrEqual((vanc ? 20 : (agent.troughMaxMgL as number)) * 1.000001);
					const e = predictExposure(p, k, 1, true);
					if (vanc) {
						expect(e.auc24MgHL).toBeGreaterThanOrEqual(400 - 1e-6);
						expect(e.auc24MgHL).toBeLessThanOrEqual(600 + 1e-6);
					} else expect(e.troughMgL).toBeLessThanOrEqual((agent.troughMaxMgL as number) * 1.000001);
					// and the code's own invariant checker agrees
					const violations = proposalViolations(
						{
							agent: vanc ? { ...agent, aucTargetMgHL: [400, 600] } : agent,
							route: 'iv',
							reference: levelReference(vanc, 'from levels'),
							therapy: {
								route: 'iv',
								systemic: true,
								bioavailability: 1,
								dayOfTherapy: 4,
								dosesGiven: 4,
								newOrder: false,
								restarted: false,
								extendedInfusion: false
							},
							kinetics: k,
							weightKg: null
						},
						p
					);
					expect(violations).toEqual([]);
				}
			),
			{ numRuns: 300, seed: 18 }
		);
		// the property must have met both outcomes to mean anything
		expect(seen.proposed).toBeGreaterThan(50);
		expect(seen.absent).toBeGreaterThan(0);
	});
});
