// Types of the rule set as stored in rule_versions.rules (a JSON array of RuleDefinition).

import { SEVERITIES, type Severity } from '../domain/vocabulary';

export { SEVERITIES, type Severity };

/** A JSON Logic expression (jsonlogic.com): plain JSON, validated against the facts schema on save. */
export type JsonLogic = null | boolean | number | string | JsonLogic[] | { [op: string]: JsonLogic };

export type RuleDefinition = {
	/** stable key: flags are one per order and rule key, across versions */
	key: string;
	title: string;
	/** what the rule checks and where its thresholds come from */
	description: string;
	enabled: boolean;
	severity: Severity;
	/** optional condition that raises the severity (e.g. albumin below the severe threshold) */
	escalation: { when: JsonLogic; severity: Severity } | null;
	/**
	 * facts that must be known for the rule to be decided; when one is null the rule is
	 * "indeterminate": an open flag is left as it is and no flag is opened
	 */
	requires: string[];
	/** the condition; thresholds are read as {"var": "params.<name>"} */
	when: JsonLogic;
	/** the rule's named thresholds (see PARAM_SPECS for units and ranges) */
	params: Record<string, number>;
	/** finding text; {factName} and {params.name} are filled with formatted values and units */
	finding: string;
	suggestedAction: string;
};

export type ParamSpec = {
	label: string;
	unit: string;
	min: number;
	max: number;
	step: number;
	integer?: boolean;
	defaultValue: number;
	/** where the default comes from: a published source, "common practice" or "from memory" */
	source: string;
};
