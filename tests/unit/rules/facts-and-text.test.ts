import { describe, expect, it } from 'vitest';
import { assess } from '../../../src/lib/clinical/assess';
import type { AgentParams } from '../../../src/lib/clinical/types';
import { buildFacts, changeLog2, defaultRules, diffRuleSets, FACT_NAMES, FACTS_SCHEMA, fillTemplate, priorityScore } from '../../../src/lib/rules';
import { formatFact } from '../../../src/lib/format';
import agentsFixture from '../../../fixtures/agents.json';
import { quietFacts } from './helpers';

type FixtureAgent = AgentParams & { agentClass: string };
const agents = (agentsFixture as unknown as { agents: FixtureAgent[] }).agents;
const at = new Date('2026-03-10T08:00:00Z');
const hoursAgo = (h: number) => new Date(at.getTime() - h * 3_600_000);

function assessFor(agent: FixtureAgent, creatinineMgDl: number[], order: { doseMg: number; intervalH: number }) {
	const input = {
		at,
		patient: { ageYears: 67, sex: 'female' as const, heights: [{ at: hoursAgo(200), cm: 165 }], weights: [{ at: hoursAgo(200), kg: 72 }] },
		creatinine: creatinineMgDl.map((v, i) => ({ at: hoursAgo(12 + 24 * (creatinineMgDl.length - 1 - i)), creatinine: { value: v, unit: 'mg/dL' as const } })),
		albumin: [{ at: hoursAgo(20), gL: 26 }],
		agent,
		order: { ...order, infusionH: 0.5, route: 'iv' as const, startAt: hoursAgo(24 * creatinineMgDl.length) }
	};
	return { assessment: assess(input), input };
}

describe('facts schema', () => {
	it('documents every fact with a type, a unit and a meaning, and names carry their units', () => {
		for (const name of FACT_NAMES) {
			const spec = FACTS_SCHEMA[name];
			expect(spec.meaning.length, name).toBeGreaterThan(5);
			if (spec.unit === 'mL/min') expect(name).toMatch(/MlMin$/);
			if (spec.unit === 'g/L') expect(name).toMatch(/GL$/);
			if (spec.unit === 'h') expect(name).toMatch(/H$/);
			if (spec.unit === 'mg/L') expect(name).toMatch(/MgL$/);
		}
	});

	it('builds exactly the schema’s facts from a real assessment', () => {
		const agent = agents.find((a) => a.name === 'Meropenem') as FixtureAgent;
		const { assessment, input } = assessFor(agent, [0.9, 1.4, 2.1], { doseMg: 1000, intervalH: 8 });
		const facts = buildFacts({ assessment, agent: { code: agent.code, name: agent.name, agentClass: agent.agentClass, params: agent }, order: input.order });
		expect(Object.keys(facts).sort()).toEqual([...FACT_NAMES].sort());
		expect(facts.crclMlMin).toBe(assessment.renal.crclMlMin);
		expect(facts.kdigoStage).toBe(assessment.renal.kdigoStage);
		expect(facts.dailyDoseMg).toBe(3000);
		expect(facts.orderAgeH).toBe(72);
		// the largest 48-h fall is read from the trace; 0.9 → 1.4 → 2.1 never falls
		expect(facts.creatinineFall48hMgDl).toBe(0);
	});

	it('agrees with assess() on the renal band for every fixture agent (same library, same band)', () => {
		for (const agent of agents) {
			for (const creatinine of [
				[0.8, 0.8],
				[1.2, 2.4],
				[3, 5]
			]) {
				const { assessment, input } = assessFor(agent, creatinine, { doseMg: agent.usualDoseMg ?? 500, intervalH: agent.usualIntervalH });
				const facts = buildFacts({
					assessment,
					agent: { code: agent.code, name: agent.name, agentClass: agent.agentClass, params: agent },
					order: input.order
				});
				expect(facts.bandDailyDoseMg, `${agent.name} ${creatinine}`).toBe(assessment.dosing.bandDailyDoseMg);
				expect(facts.doseVsBand, `${agent.name} ${creatinine}`).toBe(assessment.dosing.comparedToBand);
			}
		}
	});

	it('uses the library as it is now: a changed band changes the band facts of a stored assessment', () => {
		const agent = agents.find((a) => a.name === 'Meropenem') as FixtureAgent;
		const { assessment, input } = assessFor(agent, [0.8, 0.8], { doseMg: 1000, intervalH: 8 });
		const halved = { ...agent, renalBands: agent.renalBands.map((b) => ({ ...b, doseMg: b.doseMg === null ? null : b.doseMg / 2 })) };
		const before = buildFacts({ assessment, agent: { code: agent.code, name: agent.name, agentClass: agent.agentClass, params: agent }, order: input.order });
		const after = buildFacts({ assessment, agent: { code: agent.code, name: agent.name, agentClass: agent.agentClass, params: halved }, order: input.order });
		expect(after.doseBandRatio).toBeCloseTo((before.doseBandRatio as number) * 2, 10);
	});

	it('reads dates stored as JSON strings', () => {
		const agent = agents.find((a) => a.name === 'Vancomycin') as FixtureAgent;
		const { assessment, input } = assessFor(agent, [1, 1], { doseMg: 1000, intervalH: 12 });
		const stored = JSON.parse(JSON.stringify(assessment));
		const a = buildFacts({ assessment, agent: { code: agent.code, name: agent.name, agentClass: agent.agentClass, params: agent }, order: input.order });
		const b = buildFacts({
			assessment: stored,
			agent: { code: agent.code, name: agent.name, agentClass: agent.agentClass, params: agent },
			order: { ...input.order, startAt: input.order.startAt.toISOString() }
		});
		expect(b).toEqual(a);
	});
});

describe('finding text', () => {
	it('formats numbers with their units, fractions as percentages and missing values as "not available"', () => {
		expect(formatFact(52.123, 'mL/min')).toBe('52.1\u202fmL/min');
		expect(formatFact(1234.5, 'mg/d')).toBe('1235\u202fmg/d');
		expect(formatFact(0.95, 'fraction')).toBe('95\u202f%');
		expect(formatFact(1.6, '×')).toBe('1.6×');
		expect(formatFact(2, '{stage}')).toBe('stage 2');
		expect(formatFact(null, 'g/L')).toBe('not available');
		expect(formatFact(true, '')).toBe('yes');
	});

	it('fills facts and parameters into a template and leaves unknown placeholders visible', () => {
		const text = fillTemplate('CrCl {crclMlMin} vs {params.arcCrclMlMin}; {nonsense}', quietFacts({ crclMlMin: 131.26 }), { arcCrclMlMin: 130 });
		expect(text).toBe('CrCl 131\u202fmL/min vs 130\u202fmL/min; {nonsense}');
	});
});

describe('priority score', () => {
	it('always ranks a higher severity above a lower one, whatever the change and age', () => {
		const maxModerate = priorityScore({ severity: 'moderate', changeLog2: 10, ageH: 1000 });
		const minHigh = priorityScore({ severity: 'high', changeLog2: 0, ageH: 0 });
		const maxLow = priorityScore({ severity: 'low', changeLog2: 10, ageH: 1000 });
		const minModerate = priorityScore({ severity: 'moderate', changeLog2: 0, ageH: 0 });
		expect(minHigh).toBeGreaterThan(maxModerate);
		expect(minModerate).toBeGreaterThan(maxLow);
	});

	it('rises with the size of the change and with age, each up to a cap', () => {
		const base = priorityScore({ severity: 'moderate', changeLog2: 0, ageH: 0 });
		expect(priorityScore({ severity: 'moderate', changeLog2: 1, ageH: 0 })).toBeGreaterThan(base);
		expect(priorityScore({ severity: 'moderate', changeLog2: 0, ageH: 24 })).toBeGreaterThan(base);
		expect(priorityScore({ severity: 'moderate', changeLog2: 3, ageH: 0 })).toBe(priorityScore({ severity: 'moderate', changeLog2: 1.5, ageH: 0 }));
	});

	it('measures a halving and a doubling alike', () => {
		expect(changeLog2({ halfLifeRatio: 2, crclRatio: null, doseBandRatio: null })).toBe(1);
		expect(changeLog2({ halfLifeRatio: null, crclRatio: 0.5, doseBandRatio: null })).toBe(1);
		expect(changeLog2({ halfLifeRatio: null, crclRatio: null, doseBandRatio: null })).toBe(0);
	});
});

describe('readable diff between versions', () => {
	it('names the changed thresholds with units, severity, on/off and texts; unchanged rules are left out', () => {
		const before = defaultRules();
		const after = defaultRules();
		after.find((r) => r.key === 'possible-arc')!.params.arcCrclMlMin = 120;
		after.find((r) => r.key === 'aki')!.severity = 'high';
		after.find((r) => r.key === 'creatinine-missing')!.enabled = false;
		const diff = diffRuleSets(before, after);
		expect(diff.map((d) => d.ruleKey)).toEqual(['possible-arc', 'aki', 'creatinine-missing']);
		expect(diff[0].changes).toEqual(['Possible augmented renal clearance from CrCl: 130\u202fmL/min → 120\u202fmL/min']);
		expect(diff[1].changes).toEqual(['severity moderate → high']);
		expect(diff[2].changes).toEqual(['switched off']);
		expect(diffRuleSets(before, before)).toEqual([]);
	});
});
