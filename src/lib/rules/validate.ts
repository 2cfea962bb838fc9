// Validation of a rule set before it is stored: shape (zod), thresholds within their ranges, and JSON
// Logic that uses only known operators, known facts and the rule's own parameters — each problem named.
import { z } from 'zod';
import { FACTS_SCHEMA } from './facts';
import { templatePlaceholders } from './evaluate';
import { formatFact } from '../format/number';
import { PARAM_ORDER, PARAM_SPECS, paramSpec } from './params';
import { SEVERITIES, type JsonLogic, type ParamSpec, type RuleDefinition } from './types';

/** JSON Logic operators a rule may use: comparison, logic and arithmetic. */
export const ALLOWED_OPERATORS = new Set([
	'var',
	'==',
	'===',
	'!=',
	'!==',
	'!',
	'!!',
	'and',
	'or',
	'if',
	'>',
	'>=',
	'<',
	'<=',
	'+',
	'-',
	'*',
	'/',
	'%',
	'min',
	'max',
	'in'
]);

export type RuleIssue = {
	/** the rule's key, or null for a problem with the whole set */
	ruleKey: string | null;
	/** dotted field inside the rule, e.g. "params.arcCrclMlMin", "when", "finding" */
	field: string;
	message: string;
};

export type ValidationResult = { ok: true; rules: RuleDefinition[] } | { ok: false; issues: RuleIssue[] };

const FACT_NAMES = Object.keys(FACTS_SCHEMA);

function distance(a: string, b: string): number {
	const row = Array.from({ length: b.length + 1 }, (_, i) => i);
	for (let i = 1; i <= a.length; i++) {
		let diagonal = row[0];
		row[0] = i;
		for (let j = 1; j <= b.length; j++) {
			const above = row[j];
			row[j] = Math.min(row[j] + 1, row[j - 1] + 1, diagonal + (a[i - 1] === b[j - 1] ? 0 : 1));
			diagonal = above;
		}
	}
	return row[b.length];
}

/** The closest known name, for "did you mean …?" (case-insensitive match, then a name it begins, then ≤ 3 edits). */
export function closestName(name: string, known: readonly string[]): string | null {
	const lower = name.toLowerCase();
	const exact = known.find((k) => k.toLowerCase() === lower);
	if (exact) return exact;
	if (lower.length >= 3) {
		const prefixed = known.filter((k) => k.toLowerCase().startsWith(lower));
		if (prefixed.length === 1) return prefixed[0];
	}
	let best: string | null = null;
	let bestDistance = 4;
	for (const k of known) {
		const d = distance(lower, k.toLowerCase());
		if (d < bestDistance) {
			best = k;
			bestDistance = d;
		}
	}
	return best;
}

function unknownVariable(name: string, where: string): string {
	const hint = closestName(name, FACT_NAMES);
	return `${where}: unknown variable "${name}"${hint ? ` (did you mean "${hint}"?)` : ''}. Variables are the facts listed in the facts schema, or params.<name> for the rule's thresholds.`;
}

/** Checks one JSON Logic expression; returns a message per problem. */
export function checkLogic(logic: unknown, paramNames: readonly string[], where: string): string[] {
	const problems: string[] = [];
	const visit = (node: unknown) => {
		if (node === null || typeof node === 'number' || typeof node === 'string' || typeof node === 'boolean') {
			if (typeof node === 'number' && !Number.isFinite(node)) problems.push(`${where}: numbers must be finite`);
			return;
		}
		if (Array.isArray(node)) {
			node.forEach(visit);
			return;
		}
		if (typeof node !== 'object') {
			problems.push(`${where}: ${typeof node} is not JSON`);
			return;
		}
		const keys = Object.keys(node);
		if (keys.length !== 1) {
			problems.push(
				`${where}: each operation must be an object with exactly one operator (found ${keys.length === 0 ? 'none' : keys.map((k) => `"${k}"`).join(', ')})`
			);
			return;
		}
		const op = keys[0];
		const arg = (node as Record<string, unknown>)[op];
		if (!ALLOWED_OPERATORS.has(op)) {
			problems.push(`${where}: unknown operator "${op}" (allowed: ${[...ALLOWED_OPERATORS].join(' ')})`);
			return;
		}
		if (op === 'var') {
			const name = Array.isArray(arg) ? arg[0] : arg;
			if (typeof name !== 'string' || name === '') {
				problems.push(`${where}: "var" needs a variable name`);
				return;
			}
			if (Array.isArray(arg) && arg.length > 1) {
				if (arg.length > 2) problems.push(`${where}: "var" takes a name and at most one default value`);
				else visit(arg[1]);
			}
			if (name.startsWith('params.')) {
				const param = name.slice('params.'.length);
				if (!paramNames.includes(param)) {
					const hint = closestName(param, paramNames);
					problems.push(
						`${where}: unknown parameter "${name}"${hint ? ` (did you mean "params.${hint}"?)` : ''}; this rule's parameters are ${paramNames.length ? paramNames.map((p) => `params.${p}`).join(', ') : 'none'}`
					);
				}
			} else if (!(name in FACTS_SCHEMA)) {
				problems.push(unknownVariable(name, where));
			}
			return;
		}
		visit(arg);
	};
	if (logic === null || typeof logic !== 'object' || Array.isArray(logic)) {
		problems.push(`${where}: must be a JSON Logic operation such as {">=": [{"var": "crclMlMin"}, {"var": "params.arcCrclMlMin"}]}`);
		return problems;
	}
	visit(logic);
	return problems;
}

/** Parses JSON Logic typed by an administrator, naming the rule when the JSON itself is broken. */
export function parseLogicText(text: string, where: string): { ok: true; logic: JsonLogic } | { ok: false; message: string } {
	try {
		return { ok: true, logic: JSON.parse(text) as JsonLogic };
	} catch (error) {
		return { ok: false, message: `${where}: not valid JSON (${error instanceof Error ? error.message : String(error)})` };
	}
}

/**
 * The zod schema of one named threshold: a finite number within its range (and whole when it must be),
 * with messages that name the threshold, its range and its unit.
 */
export function paramSchema(name: string, spec: ParamSpec) {
	const range = `between ${formatFact(spec.min, spec.unit)} and ${formatFact(spec.max, spec.unit)}`;
	const got = (v: unknown) => (typeof v === 'number' ? formatFact(v, spec.unit) : String(v));
	return z
		.number({ error: `${spec.label} (${name}) must be a number ${range}.` })
		.refine((v) => v >= spec.min && v <= spec.max, { error: (issue) => `${spec.label} (${name}) must be ${range}; got ${got(issue.input)}.`, abort: true })
		.refine((v) => !spec.integer || Number.isInteger(v), { error: (issue) => `${spec.label} (${name}) must be a whole number; got ${String(issue.input)}.` });
}

const severitySchema = z.enum(SEVERITIES, { message: 'Choose a severity: high, moderate or low.' });

const ruleShape = z.object({
	key: z.string().regex(/^[a-z][a-z0-9-]{1,62}$/, 'Rule keys are lower-case words joined by hyphens.'),
	title: z.string().trim().min(3, 'Give the rule a title (at least 3 characters).').max(120, 'Title is too long (120 characters at most).'),
	description: z.string().max(1000, 'Description is too long (1,000 characters at most).'),
	enabled: z.boolean({ message: 'Say whether the rule is on or off.' }),
	severity: severitySchema,
	escalation: z.object({ when: z.unknown(), severity: severitySchema }).nullable(),
	requires: z.array(z.string()),
	when: z.unknown(),
	params: z.record(z.string(), z.number({ message: 'Thresholds must be numbers.' })),
	finding: z.string().trim().min(10, 'Write the finding text (at least 10 characters).').max(600, 'Finding text is too long (600 characters at most).'),
	suggestedAction: z
		.string()
		.trim()
		.min(5, 'Write the suggested action (at least 5 characters).')
		.max(600, 'Suggested action is too long (600 characters at most).')
});

function ruleIssues(rule: z.infer<typeof ruleShape>): RuleIssue[] {
	const issues: RuleIssue[] = [];
	const add = (field: string, message: string) => issues.push({ ruleKey: rule.key, field, message });
	const label = `Rule "${rule.title}"`;
	const paramNames = Object.keys(rule.params);
	for (const name of paramNames) {
		const spec = paramSpec(name);
		const value = rule.params[name];
		if (!spec) {
			const hint = closestName(name, Object.keys(PARAM_SPECS));
			add(`params.${name}`, `${label}: unknown threshold "${name}"${hint ? ` (did you mean "${hint}"?)` : ''}.`);
			continue;
		}
		const checked = paramSchema(name, spec).safeParse(value);
		if (!checked.success) add(`params.${name}`, `${label}: ${checked.error.issues[0].message}`);
	}
	for (const [low, high, message] of PARAM_ORDER) {
		if (low in rule.params && high in rule.params && rule.params[low] > rule.params[high]) {
			add(`params.${low}`, `${label}: ${PARAM_SPECS[low].label} (${low}) ${message} (${high}).`);
		}
	}
	for (const name of rule.requires) {
		if (!(name in FACTS_SCHEMA)) add('requires', unknownVariable(name, `${label}, required facts`));
	}
	for (const message of checkLogic(rule.when, paramNames, `${label}, condition`)) add('when', message);
	if (rule.escalation) {
		for (const message of checkLogic(rule.escalation.when, paramNames, `${label}, escalation`)) add('escalation.when', message);
	}
	for (const [field, template] of [
		['finding', rule.finding],
		['suggestedAction', rule.suggestedAction]
	] as const) {
		for (const name of templatePlaceholders(template)) {
			if (name.startsWith('params.')) {
				if (!paramNames.includes(name.slice('params.'.length)))
					add(field, `${label}, ${field === 'finding' ? 'finding text' : 'suggested action'}: unknown parameter "{${name}}".`);
			} else if (!(name in FACTS_SCHEMA)) {
				add(field, unknownVariable(name, `${label}, ${field === 'finding' ? 'finding text' : 'suggested action'}`).replace(`"${name}"`, `"{${name}}"`));
			}
		}
	}
	return issues;
}

/** Validates a whole rule set; on success returns it trimmed and typed. */
export function validateRuleSet(input: unknown): ValidationResult {
	const parsed = z.array(z.unknown()).min(1, 'A rule set needs at least one rule.').safeParse(input);
	if (!parsed.success) return { ok: false, issues: [{ ruleKey: null, field: 'rules', message: parsed.error.issues[0].message }] };
	const issues: RuleIssue[] = [];
	const rules: RuleDefinition[] = [];
	const seen = new Set<string>();
	parsed.data.forEach((raw, index) => {
		const rule = ruleShape.safeParse(raw);
		const key = typeof (raw as { key?: unknown })?.key === 'string' ? (raw as { key: string }).key : `#${index + 1}`;
		if (!rule.success) {
			for (const issue of rule.error.issues) {
				const field = issue.path.join('.') || 'rule';
				issues.push({ ruleKey: key, field, message: `Rule "${key}", ${field}: ${issue.message}` });
			}
			return;
		}
		if (seen.has(rule.data.key)) issues.push({ ruleKey: rule.data.key, field: 'key', message: `Rule key "${rule.data.key}" is used twice.` });
		seen.add(rule.data.key);
		issues.push(...ruleIssues(rule.data));
		rules.push(rule.data as RuleDefinition);
	});
	issues.push(...oneBandTolerance(rules));
	return issues.length > 0 ? { ok: false, issues } : { ok: true, rules };
}

/**
 * The band tolerance is one value for the whole rule set: the assessment's "within / above / below" and
 * the flag page read it too, so two rules with different values could not both be right.
 */
function oneBandTolerance(rules: readonly RuleDefinition[]): RuleIssue[] {
	const carrying = rules.filter((r) => 'bandTolerance' in r.params);
	if (carrying.length === 0) return [];
	const [first] = carrying;
	const value = first.params.bandTolerance;
	return carrying
		.filter((r) => r.params.bandTolerance !== value)
		.map((r) => ({
			ruleKey: r.key,
			field: 'params.bandTolerance',
			message: `Rule "${r.key}": ${PARAM_SPECS.bandTolerance.label} is one value for the whole rule set; "${first.key}" has ${value} and this rule ${r.params.bandTolerance}. Set the same value in every rule that uses it.`
		}));
}
