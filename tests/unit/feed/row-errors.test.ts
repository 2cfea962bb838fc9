// The row-errors CSV an upload page builds in the browser quotes the uploaded file (column names,
// values in the reasons): text a spreadsheet would run as a formula is neutralised with a leading
// apostrophe, as in every server export (OWASP, "CSV Injection").
import { describe, expect, it } from 'vitest';
import { rowErrorsCsv } from '../../../src/lib/feed/row-errors';

describe('rowErrorsCsv', () => {
	it('writes a header and one line per error, quoting commas and quotes (RFC 4180)', () => {
		const csv = rowErrorsCsv([{ line: 3, column: 'value', reason: 'is "abc", not a number' }]);
		expect(csv).toBe('\ufeffline,column,reason\r\n3,value,"is ""abc"", not a number"\r\n');
	});

	it('neutralises formulas taken from the uploaded file', () => {
		const csv = rowErrorsCsv([
			{ line: 2, column: '=HYPERLINK("http://evil.example","x")', reason: 'unknown column' },
			{ line: 4, column: 'unit', reason: '+1 is not a unit' },
			{ line: 5, column: '@SUM(A1)', reason: '-2 mg/dL is negative' }
		]);
		const lines = csv.replace('\ufeff', '').trimEnd().split('\r\n');
		expect(lines[1]).toBe(`2,"'=HYPERLINK(""http://evil.example"",""x"")",unknown column`);
		expect(lines[2]).toBe("4,unit,'+1 is not a unit");
		expect(lines[3]).toBe("5,'@SUM(A1),'-2 mg/dL is negative");
	});
});
