import { requirePageRole } from '$lib/server/auth/access';
import { config } from '$lib/server/config';
import { lastDays, parseReportQuery, reportQueryString, buildTables, FINDINGS_UNIT, FLAGS_UNIT, ruleColumns, reports } from '$lib/server/reports';
import { ruleChart } from './rule-chart';
import type { PageServerLoad } from './$types';

/** What the page shows, computed on the server: tables (also used by the CSV exports) and chart series. */
async function view(filter: reports.ReportFilter) {
	const report = await reports.build(filter);
	const tables = buildTables(report);
	const rules = ruleColumns(report);
	const { ruleSeries, byRule } = ruleChart(rules, tables['findings-by-rule'].rows);
	const bySeverity = tables['flags-by-severity'].rows.map((row) => ({
		day: row.day as string,
		high: row.high as number,
		moderate: row.moderate as number,
		low: row.low as number
	}));
	const firstAction = report.timeToAction.find((d) => d.measure === 'first_action');
	return {
		empty: reports.isEmpty(report),
		asOf: report.asOf,
		tables,
		charts: { ruleSeries, byRule, bySeverity },
		units: { flags: FLAGS_UNIT, findings: FINDINGS_UNIT },
		summary: {
			flagsRaised: report.flagsRaised,
			findingsRaised: report.findingsRaised,
			sent: report.recommendations.sent,
			answered: report.recommendations.answered,
			acceptanceOfAnswered: report.recommendations.acceptanceOfAnswered,
			acceptanceOfSent: report.recommendations.acceptanceOfSent,
			medianFirstActionH: firstAction?.medianH ?? null,
			dotPer1000: report.antimicrobialUse.totalDotPer1000PatientDays,
			patientDays: report.antimicrobialUse.patientDays
		}
	};
}

function presets(timeZone: string) {
	const last = (days: number, label: string) => ({ label, ...lastDays(timeZone, days) });
	const today = lastDays(timeZone, 1).to;
	const firstOfThisMonth = `${today.slice(0, 8)}01`;
	const endOfLastMonth = reports.addDays(firstOfThisMonth, -1);
	return [
		last(7, 'Last 7 days'),
		last(30, 'Last 30 days'),
		last(90, 'Last 90 days'),
		{ label: 'Previous month', from: `${endOfLastMonth.slice(0, 8)}01`, to: endOfLastMonth }
	];
}

export const load: PageServerLoad = async ({ locals, url }) => {
	requirePageRole(locals, url, 'pharmacist', 'admin');
	const timeZone = config.hospitalTimeZone;
	const query = parseReportQuery(url.searchParams, timeZone);
	const wards = await reports.listWards();
	const common = { wards, timeZone, presets: presets(timeZone) };
	if (!query.ok) {
		return { ...common, filter: query.values, query: null, errors: query.errors, report: null };
	}
	return {
		...common,
		filter: query.filter,
		query: reportQueryString(query.filter),
		errors: {} as Record<string, string>,
		// awaited, not streamed: every aggregate is one indexed query, and a whole report (numbers, tables and
		// the CSV links) arrives at once; the page shows its loading state while a new range is fetched
		report: await view(query.filter)
	};
};
