// The findings-per-day chart's series, shaped on the server for the report page.

const OTHER_COLOUR = '#c9d1d6';
const SERIES_COLOURS = ['#1f6f78', '#b7862b', '#5b6b75', '#b5462f', '#1d2a33', '#6fa8ae', '#d8b56e', '#9aa8b0', '#d98b78', '#17555c'];

/** Rules drawn one by one in the findings chart; the rest share one "other rules" bar (the table lists every rule). */
export const CHART_RULES = 7;

/**
 * The findings-per-day chart: the rules with the most findings in the range each get a series, the
 * others are summed into one, so the chart stays readable and quick to draw however many rules a
 * hospital runs (a stacked bar per rule per day grows with both). Series get neutral keys: a rule key
 * may hold characters an accessor path would misread.
 */
export function ruleChart(rules: { key: string; label: string }[], rows: Record<string, string | number | null>[]) {
	const count = (rule: { key: string }, row: Record<string, string | number | null>) => Number(row[`rule:${rule.key}`] ?? 0);
	const totals = rules.map((rule) => rows.reduce((sum, row) => sum + count(rule, row), 0));
	const ranked = rules.map((rule, i) => ({ rule, total: totals[i], i })).sort((a, b) => b.total - a.total || a.i - b.i);
	const shown = ranked.length > CHART_RULES + 1 ? ranked.slice(0, CHART_RULES).sort((a, b) => a.i - b.i) : ranked.sort((a, b) => a.i - b.i);
	const others = ranked.length > CHART_RULES + 1 ? ranked.slice(CHART_RULES).map((r) => r.rule) : [];
	const ruleSeries = shown.map(({ rule }, n) => ({ key: `s${n}`, label: rule.label, color: SERIES_COLOURS[n % SERIES_COLOURS.length] }));
	if (others.length > 0) ruleSeries.push({ key: 'other', label: `${others.length} other rules`, color: OTHER_COLOUR });
	const byRule = rows.map((row) => ({
		day: row.day as string,
		...Object.fromEntries(shown.map(({ rule }, n) => [`s${n}`, count(rule, row)])),
		...(others.length > 0 ? { other: others.reduce((sum, rule) => sum + count(rule, row), 0) } : {})
	}));
	return { ruleSeries, byRule };
}
