import { SEVERITIES as SEVERITY_LIST, severityLabel } from '../../domain/vocabulary';
import type { DurationStats, Part, StewardshipReport } from './queries';

/**
 * The report's tables, as the page shows them and as the CSV exports write them: one definition, so
 * the file a committee receives holds exactly the numbers on the screen.
 */
export type Cell = string | number | null;
export type Column = { key: string; label: string; numeric?: boolean; unit?: string };
export type ReportTable = { key: TableKey; title: string; columns: Column[]; rows: Record<string, Cell>[] };

export const TABLE_KEYS = [
	'flags-by-severity',
	'findings-by-rule',
	'recommendations',
	'time-to-action',
	'agents-flagged',
	'dot-by-agent',
	'dot-by-class'
] as const;
export type TableKey = (typeof TABLE_KEYS)[number];

/** Which part of the report each table is made from. */
export const PART_OF: Record<TableKey, Part> = {
	'flags-by-severity': 'flagsPerDay',
	'findings-by-rule': 'findingsPerDay',
	recommendations: 'recommendations',
	'time-to-action': 'timeToAction',
	'agents-flagged': 'agentsFlagged',
	'dot-by-agent': 'antimicrobialUse',
	'dot-by-class': 'antimicrobialUse'
};

export const SEVERITIES = SEVERITY_LIST.map((key) => ({ key, label: severityLabel(key) }));

const MEASURE_LABELS: Record<DurationStats['measure'], string> = {
	first_action: 'Creation → first action',
	closure: 'Creation → closure (all outcomes)',
	closure_by_team: 'Creation → closure by the team (not superseded)'
};

/** Rounds for publication; null stays null (shown as "—", written empty in CSV). */
export function round(value: number | null, decimals: number): number | null {
	if (value === null || !Number.isFinite(value)) return null;
	const f = 10 ** decimals;
	return Math.round(value * f) / f;
}
const pct = (ratio: number | null) => round(ratio === null ? null : ratio * 100, 1);

/** What the exports and the page call the two units counted (see reports.ts). */
export const FLAGS_UNIT = 'one per order episode';
export const FINDINGS_UNIT = 'one per rule that held';

export type RuleColumn = { key: string; label: string };

/**
 * The rules with findings in the range, in the order of their totals (largest first), for stable
 * stacking and columns. Labelled by rule title; two rules sharing a title also show their keys.
 */
export function ruleColumns(report: StewardshipReport): RuleColumn[] {
	const totals = new Map<string, { title: string; findings: number }>();
	for (const r of report.findingsPerDay) {
		const t = totals.get(r.ruleKey) ?? { title: r.ruleTitle, findings: 0 };
		totals.set(r.ruleKey, { title: t.title, findings: t.findings + r.findings });
	}
	const titleCount = new Map<string, number>();
	for (const { title } of totals.values()) titleCount.set(title, (titleCount.get(title) ?? 0) + 1);
	return [...totals]
		.sort((a, b) => b[1].findings - a[1].findings || a[1].title.localeCompare(b[1].title) || a[0].localeCompare(b[0]))
		.map(([key, { title }]) => ({ key, label: (titleCount.get(title) ?? 0) > 1 && title !== key ? `${title} (${key})` : title }));
}

/** Wide rows (one per day, one column per key); column keys carry a prefix so no rule key can clash with "day" or "total". */
function perDay<R extends { day: string }>(
	report: StewardshipReport,
	counted: readonly R[],
	keyOf: (r: R) => string,
	countOf: (r: R) => number,
	keys: readonly string[],
	prefix: string
) {
	const byDay = new Map(report.days.map((day) => [day, Object.fromEntries(keys.map((k) => [k, 0])) as Record<string, number>]));
	for (const r of counted) {
		const row = byDay.get(r.day);
		if (row) row[keyOf(r)] += countOf(r);
	}
	return report.days.map((day) => {
		const counts = byDay.get(day)!;
		const cells = Object.fromEntries(keys.map((k) => [prefix + k, counts[k]]));
		return { day, ...cells, total: keys.reduce((sum, k) => sum + counts[k], 0) };
	});
}

export function buildTable(report: StewardshipReport, key: TableKey): ReportTable {
	switch (key) {
		case 'flags-by-severity':
			return {
				key,
				title: `Flags raised per day (${FLAGS_UNIT}), by the severity of their worst finding`,
				columns: [
					{ key: 'day', label: 'Day' },
					...SEVERITIES.map((s) => ({ key: s.key, label: s.label, numeric: true, unit: 'flags' })),
					{ key: 'total', label: 'All flags', numeric: true, unit: FLAGS_UNIT }
				],
				rows: perDay(
					report,
					report.flagsPerDay,
					(r) => r.severity,
					(r) => r.flags,
					SEVERITIES.map((s) => s.key),
					''
				)
			};
		case 'findings-by-rule': {
			const rules = ruleColumns(report);
			return {
				key,
				title: `Findings raised per day (${FINDINGS_UNIT}), by rule`,
				columns: [
					{ key: 'day', label: 'Day' },
					...rules.map((r) => ({ key: `rule:${r.key}`, label: r.label, numeric: true, unit: 'findings' })),
					{ key: 'total', label: 'All findings', numeric: true, unit: FINDINGS_UNIT }
				],
				rows: perDay(
					report,
					report.findingsPerDay,
					(r) => r.ruleKey,
					(r) => r.findings,
					rules.map((r) => r.key),
					'rule:'
				)
			};
		}
		case 'recommendations': {
			const r = report.recommendations;
			const share = (n: number) => pct(r.sent === 0 ? null : n / r.sent);
			return {
				key,
				title: 'Recommendations sent and their outcomes',
				columns: [
					{ key: 'outcome', label: 'Outcome' },
					{ key: 'count', label: 'Recommendations', numeric: true },
					{ key: 'percentOfSent', label: 'Share of sent', numeric: true, unit: '%' }
				],
				rows: [
					{ outcome: 'Accepted', count: r.accepted, percentOfSent: share(r.accepted) },
					{ outcome: 'Modified', count: r.modified, percentOfSent: share(r.modified) },
					{ outcome: 'Declined', count: r.declined, percentOfSent: share(r.declined) },
					{ outcome: 'No answer yet', count: r.noAnswer, percentOfSent: share(r.noAnswer) },
					{ outcome: 'Withdrawn', count: r.withdrawn, percentOfSent: share(r.withdrawn) },
					{ outcome: 'Sent (all)', count: r.sent, percentOfSent: share(r.sent) },
					{ outcome: 'Acceptance rate, of answered', count: r.accepted + r.modified, percentOfSent: pct(r.acceptanceOfAnswered) },
					{ outcome: 'Acceptance rate, of all sent', count: r.accepted + r.modified, percentOfSent: pct(r.acceptanceOfSent) }
				]
			};
		}
		case 'time-to-action':
			return {
				key,
				title: 'Time from a flag’s creation to action and closure',
				columns: [
					{ key: 'measure', label: 'Interval' },
					{ key: 'flags', label: 'Flags measured', numeric: true, unit: FLAGS_UNIT },
					{ key: 'pending', label: 'Not reached yet', numeric: true },
					{ key: 'medianH', label: 'Median', numeric: true, unit: 'h' },
					{ key: 'p90H', label: '90th percentile', numeric: true, unit: 'h' }
				],
				rows: report.timeToAction.map((d) => ({
					measure: MEASURE_LABELS[d.measure],
					flags: d.flags,
					pending: d.pending,
					medianH: round(d.medianH, 1),
					p90H: round(d.p90H, 1)
				}))
			};
		case 'agents-flagged':
			return {
				key,
				title: 'Agents most often flagged',
				columns: [
					{ key: 'agent', label: 'Agent' },
					{ key: 'agentClass', label: 'Class' },
					{ key: 'flags', label: 'Flags', numeric: true, unit: FLAGS_UNIT },
					{ key: 'patients', label: 'Patients', numeric: true },
					{ key: 'highSeverity', label: '◆ High-severity flags', numeric: true }
				],
				rows: report.agentsFlagged.map((a) => ({
					agent: a.agentName,
					agentClass: a.agentClass,
					flags: a.flags,
					patients: a.patients,
					highSeverity: a.highSeverity
				}))
			};
		case 'dot-by-agent': {
			const use = report.antimicrobialUse;
			return {
				key,
				title: 'Days of therapy by agent',
				columns: [
					{ key: 'agent', label: 'Agent' },
					{ key: 'agentClass', label: 'Class' },
					{ key: 'dot', label: 'DOT', numeric: true, unit: 'days' },
					{ key: 'dotPer1000', label: 'DOT per 1,000 patient-days', numeric: true },
					{ key: 'patientDays', label: 'Patient-days', numeric: true, unit: 'days' }
				],
				rows: [
					...use.byAgent.map((a) => ({
						agent: a.agentName,
						agentClass: a.agentClass,
						dot: a.dot,
						dotPer1000: round(a.dotPer1000PatientDays, 1),
						patientDays: use.patientDays
					})),
					{ agent: 'All agents', agentClass: '', dot: use.totalDot, dotPer1000: round(use.totalDotPer1000PatientDays, 1), patientDays: use.patientDays }
				]
			};
		}
		case 'dot-by-class': {
			const use = report.antimicrobialUse;
			return {
				key,
				title: 'Days of therapy by class',
				columns: [
					{ key: 'agentClass', label: 'Class' },
					{ key: 'agents', label: 'Agents given', numeric: true },
					{ key: 'dot', label: 'DOT', numeric: true, unit: 'days' },
					{ key: 'dotPer1000', label: 'DOT per 1,000 patient-days', numeric: true },
					{ key: 'patientDays', label: 'Patient-days', numeric: true, unit: 'days' }
				],
				rows: [
					...use.byClass.map((k) => ({
						agentClass: k.agentClass,
						agents: k.agents,
						dot: k.dot,
						dotPer1000: round(k.dotPer1000PatientDays, 1),
						patientDays: use.patientDays
					})),
					{
						agentClass: 'All classes',
						agents: use.byAgent.length,
						dot: use.totalDot,
						dotPer1000: round(use.totalDotPer1000PatientDays, 1),
						patientDays: use.patientDays
					}
				]
			};
		}
	}
}

export function buildTables(report: StewardshipReport): Record<TableKey, ReportTable> {
	return Object.fromEntries(TABLE_KEYS.map((k) => [k, buildTable(report, k)])) as Record<TableKey, ReportTable>;
}

/** Heading of a column with its unit, e.g. "Median (h)". */
export function columnHeading(column: Column): string {
	return column.unit ? `${column.label} (${column.unit})` : column.label;
}
