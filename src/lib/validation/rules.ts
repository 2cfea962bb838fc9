// The rules form: field names, typed thresholds (fractions shown as percentages), and the mapping of
// rule-set validation issues back to the form field at fault.
import { z } from 'zod';
import { paramSpec } from '../rules/params';
import type { RuleDefinition, Severity } from '../rules/types';
import { SEVERITIES } from '../rules/types';
import { parseLogicText, validateRuleSet, type RuleIssue } from '../rules/validate';
import { displayUnit, ruleField, shownAsPercent } from './rule-fields';

export { displayUnit, ruleField, shownAsPercent, toInputValue } from './rule-fields';

function fromInputValue(text: string, unit: string): number {
	const trimmed = text.trim().replace(',', '.');
	if (trimmed === '') return NaN;
	const v = Number(trimmed);
	return shownAsPercent(unit) ? Math.round(v * 1e6) / 1e8 : v;
}

const common = z.object({
	basedOn: z.uuid('Reload the page: the version you edited is unknown.'),
	note: z.string().trim().max(300, 'Note is too long (300 characters at most).').optional()
});

export type RuleFormResult = { ok: true; rules: RuleDefinition[]; basedOn: string; note: string | null } | { ok: false; errors: Record<string, string> };

function fieldFor(issue: RuleIssue): string {
	if (!issue.ruleKey) return 'form';
	if (issue.field.startsWith('params.')) return ruleField.param(issue.ruleKey, issue.field.slice('params.'.length));
	if (issue.field === 'when' || issue.field === 'escalation.when' || issue.field === 'requires') return ruleField.logic(issue.ruleKey);
	if (issue.field === 'finding') return ruleField.finding(issue.ruleKey);
	if (issue.field === 'suggestedAction') return ruleField.suggestedAction(issue.ruleKey);
	if (issue.field === 'severity') return ruleField.severity(issue.ruleKey);
	return 'form';
}

/**
 * Applies the submitted form to the rule set it was built from and validates the result. Every error
 * is keyed by the form field at fault and its message names the rule and the threshold or variable.
 */
export function ruleSetFromForm(values: Record<string, string>, base: readonly RuleDefinition[]): RuleFormResult {
	const errors: Record<string, string> = {};
	const head = common.safeParse({ basedOn: values.basedOn, note: values.note });
	if (!head.success) {
		for (const issue of head.error.issues) errors[issue.path.join('.') || 'form'] ??= issue.message;
		return { ok: false, errors };
	}
	const rules: RuleDefinition[] = base.map((rule) => {
		const next: RuleDefinition = structuredClone(rule);
		const key = rule.key;
		if (values[ruleField.present(key)] === undefined) return next;
		next.enabled = values[ruleField.enabled(key)] === 'on' || values[ruleField.enabled(key)] === 'true';
		const severity = values[ruleField.severity(key)];
		if (severity !== undefined) {
			if ((SEVERITIES as readonly string[]).includes(severity)) next.severity = severity as Severity;
			else errors[ruleField.severity(key)] = `Rule "${rule.title}": choose a severity: high, moderate or low.`;
		}
		for (const name of Object.keys(rule.params)) {
			const field = ruleField.param(key, name);
			const text = values[field];
			if (text === undefined) continue;
			const spec = paramSpec(name);
			const value = fromInputValue(text, spec?.unit ?? '');
			if (Number.isNaN(value)) {
				errors[field] = `Rule "${rule.title}": ${spec?.label ?? name} (${name}) must be a number${spec ? ` in ${displayUnit(spec.unit)}` : ''}.`;
			} else next.params[name] = value;
		}
		if (values[ruleField.finding(key)] !== undefined) next.finding = values[ruleField.finding(key)];
		if (values[ruleField.suggestedAction(key)] !== undefined) next.suggestedAction = values[ruleField.suggestedAction(key)];
		const logicText = values[ruleField.logic(key)];
		if (logicText !== undefined && logicText.trim() !== '') {
			const parsed = parseLogicText(logicText, `Rule "${rule.title}", condition`);
			if (parsed.ok) next.when = parsed.logic;
			else errors[ruleField.logic(key)] = parsed.message;
		}
		return next;
	});
	if (Object.keys(errors).length > 0) return { ok: false, errors };
	const valid = validateRuleSet(rules);
	if (!valid.ok) {
		for (const issue of valid.issues) errors[fieldFor(issue)] ??= issue.message;
		return { ok: false, errors };
	}
	return { ok: true, rules: valid.rules, basedOn: head.data.basedOn, note: head.data.note || null };
}

export const publishSchema = z.object({
	versionId: z.uuid('Choose a version to publish.'),
	expectedActiveId: z.uuid('Reload the page: the active version is unknown.')
});

export const backTestSchema = z.object({
	versionId: z.uuid('Choose a saved draft to back-test.'),
	days: z.coerce
		.number({ error: 'Days must be a whole number from 1 to 90.' })
		.int('Days must be a whole number from 1 to 90.')
		.min(1, 'Days must be a whole number from 1 to 90.')
		.max(90, 'Days must be a whole number from 1 to 90.')
});
