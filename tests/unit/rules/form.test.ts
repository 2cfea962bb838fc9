import { describe, expect, it } from 'vitest';
import { DEFAULT_RULES, defaultRules } from '../../../src/lib/rules';
import { ruleField, ruleSetFromForm, toInputValue } from '../../../src/lib/validation/rules';

const BASED_ON = '5b7d3c1e-0f3a-4c2e-9d7b-1a2b3c4d5e6f';

/** What the page posts for the default rule set, unchanged. */
function posted(): Record<string, string> {
	const values: Record<string, string> = { basedOn: BASED_ON };
	for (const rule of DEFAULT_RULES) {
		values[ruleField.present(rule.key)] = '1';
		if (rule.enabled) values[ruleField.enabled(rule.key)] = 'on';
		values[ruleField.severity(rule.key)] = rule.severity;
		values[ruleField.finding(rule.key)] = rule.finding;
		values[ruleField.suggestedAction(rule.key)] = rule.suggestedAction;
		values[ruleField.logic(rule.key)] = JSON.stringify(rule.when, null, 2);
		for (const [name, value] of Object.entries(rule.params)) {
			values[ruleField.param(rule.key, name)] = toInputValue(
				value,
				name === 'bandTolerance' || name === 'renalFeMin' || name === 'highlyBoundMin' ? 'fraction' : ''
			);
		}
	}
	return values;
}

describe('rules form', () => {
	it('gives back the same rule set when nothing was edited (fractions round-trip through percentages)', () => {
		const result = ruleSetFromForm(posted(), defaultRules());
		expect(result.ok).toBe(true);
		expect(result.ok && result.rules).toEqual(DEFAULT_RULES);
	});

	it('reads a threshold typed in percent as a fraction, switches a rule off and keeps the note', () => {
		const values = posted();
		values[ruleField.param('low-albumin-highly-bound', 'highlyBoundMin')] = '80';
		delete values[ruleField.enabled('creatinine-missing')];
		values.note = '  tighter binding cut-off ';
		const result = ruleSetFromForm(values, defaultRules());
		if (!result.ok) throw new Error(JSON.stringify(result.errors));
		expect(result.rules.find((r) => r.key === 'low-albumin-highly-bound')?.params.highlyBoundMin).toBe(0.8);
		expect(result.rules.find((r) => r.key === 'creatinine-missing')?.enabled).toBe(false);
		expect(result.note).toBe('tighter binding cut-off');
	});

	it('leaves a rule the form did not carry as it was', () => {
		const values = posted();
		delete values[ruleField.present('aki')];
		delete values[ruleField.enabled('aki')];
		const result = ruleSetFromForm(values, defaultRules());
		expect(result.ok && result.rules.find((r) => r.key === 'aki')?.enabled).toBe(true);
	});

	it('puts each error on the field at fault, naming the rule and the threshold or variable', () => {
		const values = posted();
		values[ruleField.param('possible-arc', 'arcCrclMlMin')] = '300';
		values[ruleField.param('half-life-prolonged', 'halfLifeRatioMin')] = 'one and a half';
		values[ruleField.logic('aki')] = '{">=": [{"var": "kdigo"}, {"var": "params.akiMinStage"}]}';
		values[ruleField.logic('trough-above-limit')] = '{">": [{"var": "troughMgL"}';
		const result = ruleSetFromForm(values, defaultRules());
		expect(result.ok).toBe(false);
		if (result.ok) return;
		expect(result.errors[ruleField.param('half-life-prolonged', 'halfLifeRatioMin')]).toBe(
			'Rule "Expected half-life prolonged since the start": Expected half-life at least this multiple of its value at the start (halfLifeRatioMin) must be a number in ×.'
		);
		expect(result.errors[ruleField.logic('trough-above-limit')]).toMatch(/^Rule "Predicted trough above the agent’s limit", condition: not valid JSON/);
	});

	it('reports range and variable errors once the numbers and JSON parse', () => {
		const values = posted();
		values[ruleField.param('possible-arc', 'arcCrclMlMin')] = '300';
		values[ruleField.logic('aki')] = '{">=": [{"var": "kdigo"}, {"var": "params.akiMinStage"}]}';
		const result = ruleSetFromForm(values, defaultRules());
		expect(result.ok).toBe(false);
		if (result.ok) return;
		expect(result.errors[ruleField.param('possible-arc', 'arcCrclMlMin')]).toMatch(
			/\(arcCrclMlMin\) must be between 90\s?mL\/min and 250\s?mL\/min; got 300\s?mL\/min/u
		);
		expect(result.errors[ruleField.logic('aki')]).toContain('unknown variable "kdigo" (did you mean "kdigoStage"?)');
	});

	it('refuses a form without the version it was based on', () => {
		const values = posted();
		values.basedOn = 'not-a-uuid';
		const result = ruleSetFromForm(values, defaultRules());
		expect(!result.ok && result.errors.basedOn).toBe('Reload the page: the version you edited is unknown.');
	});
});
