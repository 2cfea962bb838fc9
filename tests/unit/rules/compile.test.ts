// The compiled evaluator must agree with json-logic-js (the reference interpreter) on every expression a
// rule may hold: checked on the default rules over random facts, and on random expressions.
import fc from 'fast-check';
import jsonLogic from 'json-logic-js';
import { describe, expect, it } from 'vitest';
import { compileLogic } from '../../../src/lib/rules/compile';
import { DEFAULT_RULES, type JsonLogic } from '../../../src/lib/rules';
import { quietFacts } from './helpers';

const nullableNumber = fc.oneof(fc.constant(null), fc.double({ min: -10, max: 1000, noNaN: true }));

const factsArb = fc.record({
	fe: fc.double({ min: 0, max: 1, noNaN: true }),
	proteinBinding: fc.double({ min: 0, max: 0.99, noNaN: true }),
	nephrotoxic: fc.boolean(),
	kdigoStage: fc.integer({ min: 0, max: 3 }),
	crclMlMin: nullableNumber,
	halfLifeRatio: nullableNumber,
	doseBandRatio: nullableNumber,
	albuminGL: nullableNumber,
	albuminAgeH: nullableNumber,
	creatinineAgeH: nullableNumber,
	creatinineRise48hMgDl: nullableNumber,
	creatinineFall48hMgDl: nullableNumber,
	troughMgL: nullableNumber,
	troughMaxMgL: nullableNumber,
	auc24MgHL: nullableNumber,
	model: fc.constantFrom('generic', 'vancomycin', 'aminoglycoside')
});

const leaf: fc.Arbitrary<JsonLogic> = fc.oneof(
	fc.constantFrom<JsonLogic>({ var: 'crclMlMin' }, { var: 'fe' }, { var: 'model' }, { var: 'params.x' }, { var: 'missingFact' }, { var: ['albuminGL', 35] }),
	fc.double({ min: -5, max: 200, noNaN: true }),
	fc.constantFrom<JsonLogic>(null, true, false, 'vancomycin', '', 0, 1)
);

const { expr } = fc.letrec<{ expr: JsonLogic }>((tie) => ({
	expr: fc.oneof(
		{ depthSize: 'small', withCrossShrink: true },
		leaf,
		fc
			.tuple(fc.constantFrom('==', '===', '!=', '!==', '>', '>=', '<', '<=', '%', '-', '/', 'in'), tie('expr'), tie('expr'))
			.map(([op, a, b]) => ({ [op]: [a, b] }) as JsonLogic),
		fc.tuple(fc.constantFrom('<', '<='), tie('expr'), tie('expr'), tie('expr')).map(([op, a, b, c]) => ({ [op]: [a, b, c] }) as JsonLogic),
		fc
			.tuple(fc.constantFrom('and', 'or', '+', '*', 'min', 'max', 'if'), fc.array(tie('expr'), { minLength: 1, maxLength: 4 }))
			.map(([op, xs]) => ({ [op]: xs }) as JsonLogic),
		fc.tuple(fc.constantFrom('!', '!!', '-'), tie('expr')).map(([op, a]) => ({ [op]: a }) as JsonLogic)
	)
}));

const same = (a: unknown, b: unknown) => (Number.isNaN(a) && Number.isNaN(b)) || Object.is(a, b) || JSON.stringify(a) === JSON.stringify(b);

describe('compiled JSON Logic', () => {
	it('agrees with json-logic-js on the default rules over random facts', () => {
		fc.assert(
			fc.property(factsArb, (partial) => {
				const facts = quietFacts(partial as never);
				for (const rule of DEFAULT_RULES) {
					const data = { ...facts, params: rule.params };
					for (const logic of [rule.when, rule.escalation?.when].filter((l) => l !== undefined)) {
						expect(compileLogic(logic)(data)).toEqual(jsonLogic.apply(logic as never, data));
					}
				}
			}),
			{ numRuns: 400 }
		);
	});

	it('agrees with json-logic-js on random expressions', () => {
		fc.assert(
			fc.property(expr, factsArb, fc.double({ min: 0, max: 200, noNaN: true }), (logic, partial, x) => {
				const data = { ...quietFacts(partial as never), params: { x } };
				let expected: unknown;
				let expectedError: unknown = null;
				try {
					expected = jsonLogic.apply(logic as never, data);
				} catch (error) {
					expectedError = error;
				}
				if (expectedError) {
					expect(() => compileLogic(logic)(data)).toThrow();
				} else {
					expect(same(compileLogic(logic)(data), expected), JSON.stringify(logic)).toBe(true);
				}
			}),
			{ numRuns: 1000 }
		);
	});
});
