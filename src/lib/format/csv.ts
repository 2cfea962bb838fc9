// CSV writing for every download, built on the server (exports) or in the browser (an upload's row
// errors). Pure.
/**
 * CSV for downloads, after RFC 4180: comma-separated, CRLF line ends, a field is quoted when it holds
 * a comma, a quote, a line break or leading/trailing space, and quotes inside are doubled. Text that
 * a spreadsheet would run as a formula (starting with = + - @, tab or carriage return) is prefixed
 * with an apostrophe (OWASP, "CSV Injection"); numbers are written as they are.
 */
export type CsvValue = string | number | boolean | null | undefined;

/** UTF-8 byte order mark, so spreadsheet programs read ◆ ◈ ◇ and accented names correctly. */
export const BOM = '\ufeff';

export function csvCell(value: CsvValue): string {
	if (value === null || value === undefined) return '';
	if (typeof value === 'number') return Number.isFinite(value) ? String(value) : '';
	if (typeof value === 'boolean') return value ? 'true' : 'false';
	let text = value;
	if (/^[=+\-@\t\r]/.test(text)) text = `'${text}`;
	return /[",\r\n]|^\s|\s$/.test(text) ? `"${text.replaceAll('"', '""')}"` : text;
}

export function csvLine(values: CsvValue[]): string {
	return values.map(csvCell).join(',') + '\r\n';
}

export function toCsv(header: string[], rows: CsvValue[][]): string {
	return BOM + csvLine(header) + rows.map(csvLine).join('');
}
