import { error } from '@sveltejs/kit';
import { requireRole } from '$lib/server/auth/access';
import { config } from '$lib/server/config';
import { csvResponse, toCsv, describeFieldErrors } from '$lib/server/http';
import { parseReportQuery, buildTable, columnHeading, PART_OF, TABLE_KEYS, type TableKey, reports } from '$lib/server/reports';
import type { RequestHandler } from './$types';

/** One report table as CSV, for the same range and wards as the page: /reports/export/<table>?from=…&to=…&ward=… */
export const GET: RequestHandler = async ({ locals, url, params }) => {
	requireRole(locals, 'pharmacist', 'admin');
	const key = params.table as TableKey;
	if (!TABLE_KEYS.includes(key)) error(404, `There is no report table called "${params.table}".`);
	const query = parseReportQuery(url.searchParams, config.hospitalTimeZone);
	if (!query.ok) error(400, describeFieldErrors(query.errors));
	const { filter } = query;
	const report = await reports.build(filter, { parts: [PART_OF[key]] });
	const table = buildTable(report, key);
	const body = toCsv(
		table.columns.map(columnHeading),
		table.rows.map((row) => table.columns.map((c) => row[c.key] ?? null))
	);
	const wards = filter.wards.length === 0 ? 'all-wards' : filter.wards.join('_');
	return csvResponse(body, `ebbline-${key}-${filter.from}-to-${filter.to}-${wards}.csv`);
};
