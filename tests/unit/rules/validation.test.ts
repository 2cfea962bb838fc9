import { describe, expect, it } from 'vitest';
import { checkLogic, defaultRules, parseLogicText, validateRuleSet, type RuleDefinition } from '../../../src/lib/rules';

function edit(key: string, change: (rule: RuleDefinition) => void) {
	const rules = defaultRules();
	const rule = rules.find((r) => r.key === key);
	if (!rule) throw new Error(key);
	change(rule);
	return validateRuleSet(rules);
}

const messages = (result: ReturnType<typeof validateRuleSet>) => (result.ok ? [] : result.issues.map((i) => i.message));

describe('JSON Logic validation', () => {
	it('rejects an unknown variable by name and suggests the known one', () => {
		const result = edit('possible-arc', (r) => {
			r.when = { '>=': [{ var: 'crclMLmin' }, { var: 'params.arcCrclMlMin' }] };
		});
		expect(result.ok).toBe(false);
		expect(messages(result).join('\n')).toContain('unknown variable "crclMLmin" (did you mean "crclMlMin"?)');
		expect(!result.ok && result.issues[0]).toMatchObject({ ruleKey: 'possible-arc', field: 'when' });
	});

	it('rejects a parameter the rule does not have, by name', () => {
		const result = edit('half-life-prolonged', (r) => {
			r.when = { '>=': [{ var: 'halfLifeRatio' }, { var: 'params.halfLifeRatoMin' }] };
		});
		expect(messages(result).join('\n')).toContain('unknown parameter "params.halfLifeRatoMin" (did you mean "params.halfLifeRatioMin"?)');
	});

	it('rejects an operator outside the allowed set, by name', () => {
		expect(checkLogic({ log: [{ var: 'crclMlMin' }] }, [], 'test')[0]).toContain('unknown operator "log"');
		expect(checkLogic({ map: [[1], { var: '' }] }, [], 'test')[0]).toContain('unknown operator "map"');
	});

	it('rejects objects with several operators, bare literals and broken JSON', () => {
		expect(checkLogic({ '>': [1, 2], '<': [1, 2] }, [], 'test')[0]).toContain('exactly one operator');
		expect(checkLogic(true, [], 'test')[0]).toContain('must be a JSON Logic operation');
		const parsed = parseLogicText('{">=": [{"var": "crclMlMin"}, 130', 'Rule "Possible ARC", condition');
		expect(parsed.ok).toBe(false);
		expect(!parsed.ok && parsed.message).toMatch(/^Rule "Possible ARC", condition: not valid JSON/);
	});

	it('checks the escalation, the required facts and the placeholders of the texts too', () => {
		expect(messages(edit('aki', (r) => (r.escalation = { when: { '>=': [{ var: 'kdigo' }, 2] }, severity: 'high' }))).join('\n')).toContain(
			'escalation: unknown variable "kdigo"'
		);
		expect(messages(edit('aki', (r) => r.requires.push('stage'))).join('\n')).toContain('unknown variable "stage"');
		expect(messages(edit('aki', (r) => (r.finding = 'AKI with creatinine {creatinine} now'))).join('\n')).toContain('unknown variable "{creatinine}"');
		expect(messages(edit('aki', (r) => (r.finding = 'AKI above {params.arcCrclMlMin} now'))).join('\n')).toContain('unknown parameter "{params.arcCrclMlMin}"');
	});
});

describe('threshold validation', () => {
	it('rejects an out-of-range threshold naming the rule, the threshold and its range with units', () => {
		const result = edit('possible-arc', (r) => (r.params.arcCrclMlMin = 20));
		expect(result.ok).toBe(false);
		expect(!result.ok && result.issues[0]).toMatchObject({ ruleKey: 'possible-arc', field: 'params.arcCrclMlMin' });
		expect(messages(result)[0]).toMatch(
			/Possible augmented renal clearance.*\(arcCrclMlMin\) must be between 90\s?mL\/min and 250\s?mL\/min; got 20\s?mL\/min/u
		);
	});

	it('shows fractions as percentages in the message', () => {
		expect(messages(edit('low-albumin-highly-bound', (r) => (r.params.highlyBoundMin = 1.2)))[0]).toMatch(/between 30\s?% and 99\s?%; got 120\s?%/u);
	});

	it('rejects a stage that is not a whole number, and thresholds out of order', () => {
		expect(messages(edit('aki', (r) => (r.params.akiMinStage = 1.5)))[0]).toContain('must be a whole number');
		expect(messages(edit('low-albumin-highly-bound', (r) => (r.params.albuminSevereGL = 32)))[0]).toContain(
			'(albuminSevereGL) must be below the low-albumin threshold'
		);
		expect(messages(edit('vancomycin-auc-outside-target', (r) => (r.params.aucLowMgHL = 700)))[0]).toContain('(aucLowMgHL)');
	});

	it('rejects an unknown threshold name and a missing number', () => {
		expect(messages(edit('aki', (r) => (r.params.akiStage = 1))).join('\n')).toContain('unknown threshold "akiStage"');
		const broken = defaultRules() as unknown as Record<string, unknown>[];
		(broken[0].params as Record<string, unknown>).bandTolerance = 'a lot';
		expect(messages(validateRuleSet(broken))[0]).toContain('params.bandTolerance: Thresholds must be numbers.');
	});

	it('rejects duplicate keys and an empty set', () => {
		const rules = defaultRules();
		rules[1].key = rules[0].key;
		expect(messages(validateRuleSet(rules)).join('\n')).toContain('Rule key "dose-above-band" is used twice.');
		expect(validateRuleSet([]).ok).toBe(false);
	});
});
