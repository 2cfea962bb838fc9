// Rule evaluation: JSON Logic over an assessment's facts, with the rule's named thresholds injected as
// `params`. Pure; the same code runs in the worker, the back-test and tests. Expressions run compiled
// (compile.ts) with json-logic-js's semantics.
import { compileLogic, logicTruthy } from './compile';
import { FACTS_SCHEMA, type Facts } from './facts';
import { formatFact } from '../format/number';
import { paramSpec } from './params';
import type { JsonLogic, RuleDefinition, Severity } from './types';

export type RuleStatus = 'holds' | 'quiet' | 'indeterminate';

export type RuleOutcome = {
	key: string;
	status: RuleStatus;
	severity: Severity;
	/** filled finding text (only when the rule holds) */
	finding: string;
	suggestedAction: string;
	/** facts named in `requires` that were missing (when indeterminate) */
	missing: string[];
	/** set when the logic itself failed to run (never for a validated rule) */
	error?: string;
};

type Data = Facts & { params: Record<string, number> };

const PLACEHOLDER = /\{([A-Za-z][A-Za-z0-9_.]*)\}/g;

/** Fills {factName} and {params.name} in a template with formatted values and units. */
export function fillTemplate(template: string, facts: Facts, params: Record<string, number>): string {
	return template.replace(PLACEHOLDER, (whole, name: string) => {
		if (name.startsWith('params.')) {
			const param = name.slice('params.'.length);
			const spec = paramSpec(param);
			return param in params && spec ? formatFact(params[param], spec.unit) : whole;
		}
		const spec = (FACTS_SCHEMA as Record<string, { unit: string }>)[name];
		return spec ? formatFact((facts as Record<string, unknown>)[name], spec.unit) : whole;
	});
}

/** Names of the {placeholders} in a template (for validation). */
export function templatePlaceholders(template: string): string[] {
	return Array.from(template.matchAll(PLACEHOLDER), (m) => m[1]);
}

function truthy(logic: JsonLogic, data: Data): boolean {
	return logicTruthy(compileLogic(logic)(data));
}

// One data object per facts object, with `params` swapped per rule: copying ~50 facts for each of ten
// rules and 50,000 orders would cost more than the evaluation itself.
const dataCache = new WeakMap<Facts, Data>();
function withParams(facts: Facts, params: Record<string, number>): Data {
	let data = dataCache.get(facts);
	if (!data) {
		data = { ...facts, params };
		dataCache.set(facts, data);
	}
	data.params = params;
	return data;
}

const NONE: string[] = [];

/** Evaluates one rule against one set of facts (disabled rules are still evaluated: callers filter). */
export function evaluateRule(rule: RuleDefinition, facts: Facts): RuleOutcome {
	// written without spreads or filters: a replay runs this ten times for each of 50,000 orders
	let missing: string[] | null = null;
	for (const name of rule.requires) {
		const value = (facts as Record<string, unknown>)[name];
		if (value === null || value === undefined) (missing ??= []).push(name);
	}
	if (missing !== null) return { key: rule.key, status: 'indeterminate', severity: rule.severity, finding: '', suggestedAction: rule.suggestedAction, missing };
	const data = withParams(facts, rule.params);
	try {
		if (!truthy(rule.when, data))
			return { key: rule.key, status: 'quiet', severity: rule.severity, finding: '', suggestedAction: rule.suggestedAction, missing: NONE };
		const severity = rule.escalation !== null && truthy(rule.escalation.when, data) ? rule.escalation.severity : rule.severity;
		return {
			key: rule.key,
			status: 'holds',
			severity,
			finding: fillTemplate(rule.finding, facts, rule.params),
			suggestedAction: rule.suggestedAction,
			missing: NONE
		};
	} catch (error) {
		return {
			key: rule.key,
			status: 'indeterminate',
			severity: rule.severity,
			finding: '',
			suggestedAction: rule.suggestedAction,
			missing: NONE,
			error: error instanceof Error ? error.message : String(error)
		};
	}
}

/** Evaluates every enabled rule of a rule set. */
export function evaluateRules(rules: readonly RuleDefinition[], facts: Facts): RuleOutcome[] {
	const outcomes: RuleOutcome[] = [];
	for (const rule of rules) if (rule.enabled) outcomes.push(evaluateRule(rule, facts));
	return outcomes;
}
