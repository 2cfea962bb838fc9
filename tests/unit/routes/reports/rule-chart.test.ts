// The findings chart draws the busiest rules one by one and sums the rest (common practice for a
// stacked bar chart: a legend past about seven colours cannot be read); no finding is lost.
import { describe, expect, it } from 'vitest';
import { CHART_RULES, ruleChart } from '../../../../src/routes/reports/rule-chart';

const rules = Array.from({ length: 12 }, (_, i) => ({ key: `r${i}`, label: `Rule ${i}` }));
const rows = ['2026-11-01', '2026-11-02'].map((day, d) => ({ day, ...Object.fromEntries(rules.map((r, i) => [`rule:${r.key}`, i * (d + 1)])) }));

describe('findings chart series', () => {
	it('draws at most CHART_RULES rules, the busiest, plus one series for the others, and keeps every finding', () => {
		const { ruleSeries, byRule } = ruleChart(rules, rows);
		expect(ruleSeries).toHaveLength(CHART_RULES + 1);
		expect(ruleSeries.slice(0, CHART_RULES).map((s) => s.label)).toEqual(['Rule 5', 'Rule 6', 'Rule 7', 'Rule 8', 'Rule 9', 'Rule 10', 'Rule 11']);
		expect(ruleSeries.at(-1)!.label).toBe('5 other rules');
		for (const [d, row] of byRule.entries()) {
			const drawn = ruleSeries.reduce((sum, s) => sum + Number((row as Record<string, unknown>)[s.key]), 0);
			const all = rules.reduce((sum, r) => sum + Number(rows[d][`rule:${r.key}` as keyof (typeof rows)[number]]), 0);
			expect(drawn).toBe(all);
		}
	});

	it('draws every rule when there are few', () => {
		const few = rules.slice(0, CHART_RULES + 1);
		const { ruleSeries } = ruleChart(few, rows);
		expect(ruleSeries.map((s) => s.label)).toEqual(few.map((r) => r.label));
	});
});
