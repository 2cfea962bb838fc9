import { reportQuerySchema } from '../../validation/reports';
import { fieldErrors, type FieldErrors } from '../../forms';
import { addDays, todayIn, type ReportFilter } from './queries';

export const DEFAULT_RANGE_DAYS = 30;

/** The last `days` calendar days up to and including today, in the hospital's zone. */
export function lastDays(timeZone: string, days = DEFAULT_RANGE_DAYS, now = new Date()): { from: string; to: string } {
	const to = todayIn(timeZone, now);
	return { from: addDays(to, -(days - 1)), to };
}

export type ParsedReportQuery = { ok: true; filter: ReportFilter } | { ok: false; errors: FieldErrors; values: { from: string; to: string; wards: string[] } };

/** Reads the report's filters from a URL; a missing date falls back to the last 30 days. */
export function parseReportQuery(params: URLSearchParams, timeZone: string, now = new Date()): ParsedReportQuery {
	const fallback = lastDays(timeZone, DEFAULT_RANGE_DAYS, now);
	const raw = {
		from: params.get('from') || fallback.from,
		to: params.get('to') || fallback.to,
		ward: params.getAll('ward').filter((w) => w.trim() !== '')
	};
	const parsed = reportQuerySchema.safeParse(raw);
	if (!parsed.success) return { ok: false, errors: fieldErrors(parsed.error), values: { from: raw.from, to: raw.to, wards: raw.ward } };
	return { ok: true, filter: { from: parsed.data.from, to: parsed.data.to, wards: parsed.data.ward } };
}

/** The same filters as a query string, for links to the CSV exports and to other ranges. */
export function reportQueryString(filter: ReportFilter): string {
	const params = new URLSearchParams({ from: filter.from, to: filter.to });
	for (const w of filter.wards) params.append('ward', w);
	return params.toString();
}
