// A readable difference between two rule sets, for the versions list ("what changed in v7").
import { formatFact } from '../format/number';
import { paramSpec } from './params';
import type { RuleDefinition } from './types';

export type RuleChange = { ruleKey: string; title: string; changes: string[] };

const quote = (text: string) => `“${text.length > 140 ? text.slice(0, 137) + '…' : text}”`;

function paramText(name: string, value: number | undefined): string {
	if (value === undefined) return 'not set';
	const spec = paramSpec(name);
	return spec ? formatFact(value, spec.unit) : String(value);
}

/** What changed from `before` to `after`, rule by rule; rules without changes are left out. */
export function diffRuleSets(before: readonly RuleDefinition[], after: readonly RuleDefinition[]): RuleChange[] {
	const result: RuleChange[] = [];
	const old = new Map(before.map((r) => [r.key, r]));
	const seen = new Set<string>();
	for (const rule of after) {
		seen.add(rule.key);
		const prev = old.get(rule.key);
		if (!prev) {
			result.push({ ruleKey: rule.key, title: rule.title, changes: ['rule added'] });
			continue;
		}
		const changes: string[] = [];
		if (prev.enabled !== rule.enabled) changes.push(rule.enabled ? 'switched on' : 'switched off');
		if (prev.severity !== rule.severity) changes.push(`severity ${prev.severity} → ${rule.severity}`);
		const names = new Set([...Object.keys(prev.params), ...Object.keys(rule.params)]);
		for (const name of names) {
			if (prev.params[name] !== rule.params[name]) {
				changes.push(`${paramSpec(name)?.label ?? name}: ${paramText(name, prev.params[name])} → ${paramText(name, rule.params[name])}`);
			}
		}
		if (prev.title !== rule.title) changes.push(`title ${quote(prev.title)} → ${quote(rule.title)}`);
		if (prev.finding !== rule.finding) changes.push(`finding text ${quote(prev.finding)} → ${quote(rule.finding)}`);
		if (prev.suggestedAction !== rule.suggestedAction) changes.push(`suggested action ${quote(prev.suggestedAction)} → ${quote(rule.suggestedAction)}`);
		if (JSON.stringify(prev.when) !== JSON.stringify(rule.when))
			changes.push(`condition (JSON Logic) ${JSON.stringify(prev.when)} → ${JSON.stringify(rule.when)}`);
		if (JSON.stringify(prev.escalation) !== JSON.stringify(rule.escalation)) {
			changes.push(`escalation ${JSON.stringify(prev.escalation)} → ${JSON.stringify(rule.escalation)}`);
		}
		if (prev.requires.join(',') !== rule.requires.join(',')) changes.push(`required facts [${prev.requires.join(', ')}] → [${rule.requires.join(', ')}]`);
		if (prev.description !== rule.description) changes.push('description edited');
		if (changes.length > 0) result.push({ ruleKey: rule.key, title: rule.title, changes });
	}
	for (const rule of before) if (!seen.has(rule.key)) result.push({ ruleKey: rule.key, title: rule.title, changes: ['rule removed'] });
	return result;
}
