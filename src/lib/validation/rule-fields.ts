// Field names and display units of the rules form: shared by the page (in the browser) and the server,
// without the rule engine behind them.

/** Form field names of one rule's inputs. */
export const ruleField = {
	/** hidden marker: the form carried this rule (an unchecked box sends nothing) */
	present: (key: string) => `${key}.present`,
	enabled: (key: string) => `${key}.enabled`,
	severity: (key: string) => `${key}.severity`,
	param: (key: string, name: string) => `${key}.param.${name}`,
	finding: (key: string) => `${key}.finding`,
	suggestedAction: (key: string) => `${key}.suggestedAction`,
	logic: (key: string) => `${key}.logic`
};

/** Thresholds in 0..1 are typed as percentages. */
export const shownAsPercent = (unit: string) => unit === 'fraction';
export const displayUnit = (unit: string) => (unit === 'fraction' ? '%' : unit === '{stage}' ? 'stage' : unit);

/** The value an input shows for a stored threshold (percent for fractions, without float noise). */
export function toInputValue(value: number, unit: string): string {
	const v = shownAsPercent(unit) ? value * 100 : value;
	return String(Math.round(v * 1e6) / 1e6);
}
