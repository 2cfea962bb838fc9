// The rows of an upload that could not be read, as a CSV file the user downloads from the browser and
// works through. The column names and reasons quote the uploaded file, so they are written through the
// shared CSV writer, which neutralises text a spreadsheet would run as a formula.
import { toCsv } from '../format/csv';

export type RowError = { line: number; column: string; reason: string };

export function rowErrorsCsv(errors: RowError[]): string {
	return toCsv(
		['line', 'column', 'reason'],
		errors.map((e) => [e.line, e.column, e.reason])
	);
}
