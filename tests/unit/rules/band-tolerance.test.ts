// The band tolerance is one value: the rules, the assessment's "within / above / below" and the flag
// page's word must agree after an administrator changes it. The orders are invented; the regimens and
// reduced bands are those of fixtures/agents.json (example data), the ±20 % default is common practice.
import { describe, expect, it } from 'vitest';
import { assess, type AgentParams, type AssessInput } from '../../../src/lib/clinical';
import { doseVsBand } from '../../../src/lib/flags/board';
import {
	bandToleranceOf,
	buildFacts,
	defaultRules,
	evaluateRules,
	PARAM_SPECS,
	validateRuleSet,
	withOneBandTolerance,
	type RuleDefinition
} from '../../../src/lib/rules';
import { DEFAULT_BAND_TOLERANCE } from '../../../src/lib/clinical/regimen';
import agentsFile from '../../../fixtures/agents.json';

type LibraryAgent = AgentParams & { name: string; agentClass: string };
const ciprofloxacin = (agentsFile.agents as unknown as LibraryAgent[]).find((a) => a.name === 'Ciprofloxacin')!;
const at = new Date('2026-02-16T08:00:00Z');
const hoursBefore = (h: number) => new Date(at.getTime() - h * 3_600_000);

/** The rule set after an administrator sets the tolerance (in every rule that reads it, as saving requires). */
function withTolerance(value: number): RuleDefinition[] {
	return defaultRules().map((r) => ('bandTolerance' in r.params ? { ...r, params: { ...r.params, bandTolerance: value } } : r));
}

/** A 78-year-old man, 60 kg, creatinine 2.2 mg/dL (CrCl about 28 mL/min: a reduced band), on oral ciprofloxacin. */
function input(doseMg: number, intervalH: number, bandTolerance: number): AssessInput {
	return {
		at,
		patient: {
			ageYears: 78,
			sex: 'male',
			heights: [{ at: hoursBefore(400), cm: 170 }],
			weights: [{ at: hoursBefore(400), kg: 60 }],
			renalReplacement: []
		},
		creatinine: [48, 24, 2].map((h) => ({ at: hoursBefore(h), creatinine: { value: 2.2, unit: 'mg/dL' as const } })),
		albumin: [],
		agent: ciprofloxacin,
		order: { doseMg, intervalH, infusionH: 0, route: 'po', startAt: hoursBefore(72), restartAt: null },
		settings: { bandTolerance }
	};
}

const ORDERS: [number, number][] = [
	[250, 24],
	[250, 12],
	[500, 24],
	[500, 18],
	[500, 12],
	[750, 12],
	[750, 8]
];

describe('one band tolerance', () => {
	it('the parameter default is the clinical core’s default', () => {
		expect(PARAM_SPECS.bandTolerance.defaultValue).toBe(DEFAULT_BAND_TOLERANCE);
		expect(bandToleranceOf(defaultRules())).toBe(DEFAULT_BAND_TOLERANCE);
	});

	for (const tolerance of [0.05, 0.2, 0.6]) {
		it(`with the tolerance set to ${tolerance}, the flag page's word and the band rules agree, also on an assessment made before the change`, () => {
			const rules = withTolerance(tolerance);
			expect(validateRuleSet(rules).ok).toBe(true);
			expect(bandToleranceOf(rules)).toBe(tolerance);
			const seen = new Set<string>();
			for (const [doseMg, intervalH] of ORDERS) {
				for (const assessedWith of [tolerance, DEFAULT_BAND_TOLERANCE]) {
					const a = assess(input(doseMg, intervalH, assessedWith));
					const agent = { code: ciprofloxacin.code, name: ciprofloxacin.name, agentClass: ciprofloxacin.agentClass, params: ciprofloxacin };
					const facts = buildFacts({ assessment: a, agent, order: input(doseMg, intervalH, tolerance).order, bandTolerance: bandToleranceOf(rules) });
					const holds = new Set(
						evaluateRules(rules, facts)
							.filter((o) => o.status === 'holds')
							.map((o) => o.key)
					);
					const word = doseVsBand(facts, a.dosing.comparedToBand);
					if (assessedWith === tolerance) expect(a.dosing.comparedToBand).toBe(word);
					expect(facts.renallyAdjusted && facts.referenceUnadjusted === false).toBe(true);
					expect(holds.has('dose-above-band'), `${doseMg} mg q${intervalH}h: page says ${word}`).toBe(word === 'above');
					expect(holds.has('dose-below-band'), `${doseMg} mg q${intervalH}h: page says ${word}`).toBe(word === 'below');
					seen.add(word);
				}
			}
			// the orders span the band at every tolerance tried
			expect(seen.has('within')).toBe(true);
			expect(seen.has('above')).toBe(true);
		});
	}

	it('a rule set whose rules disagree on the tolerance is refused, naming the rule and the field', () => {
		const rules = defaultRules().map((r) => (r.key === 'dose-below-band' ? { ...r, params: { ...r.params, bandTolerance: 0.4 } } : r));
		const result = validateRuleSet(rules);
		expect(result.ok).toBe(false);
		if (result.ok) return;
		expect(result.issues).toEqual([expect.objectContaining({ ruleKey: 'dose-below-band', field: 'params.bandTolerance' })]);
		expect(result.issues[0].message).toContain('one value for the whole rule set');
	});

	it('a stored set that disagrees is read with one value (the first rule’s)', () => {
		const stored = defaultRules().map((r) => (r.key === 'dose-below-band' ? { ...r, params: { ...r.params, bandTolerance: 0.4 } } : r));
		const read = withOneBandTolerance(stored);
		expect(read.filter((r) => 'bandTolerance' in r.params).map((r) => r.params.bandTolerance)).toEqual(
			stored.filter((r) => 'bandTolerance' in r.params).map(() => DEFAULT_BAND_TOLERANCE)
		);
		const agreeing = defaultRules();
		expect(withOneBandTolerance(agreeing)).toBe(agreeing);
	});
});
