// CSV columns, templates and row reading without a database.
import { describe, expect, it } from 'vitest';
import { checkHeader, CSV_COLUMNS, parseCsvText, readRow, templateCsv, unitWarnings } from '../../../../src/lib/server/feed';
import { fixtureIndex } from './helpers';

const ctx = { now: new Date('2026-12-01T12:00:00Z'), agents: fixtureIndex() };

describe('CSV templates', () => {
	for (const kind of ['results', 'orders'] as const) {
		it(`the ${kind} template documents every column and its example row is valid`, () => {
			const { header, rows } = parseCsvText(templateCsv(kind));
			expect(header).toEqual(CSV_COLUMNS[kind].map((c) => c.name));
			expect(checkHeader(kind, header)).toEqual({ missing: [], unknown: [] });
			expect(rows).toHaveLength(1);
			const read = readRow(kind, rows[0], ctx);
			expect(read.ok, JSON.stringify(read)).toBe(true);
		});
	}
});

describe('CSV rows', () => {
	it('numbers lines from the header (line 1) and reads header names in any case and spacing', () => {
		const { header, rows } = parseCsvText(
			'MRN, Test ,Value,Unit,Observed At\nX1,creatinine,1.2,mg/dL,2026-11-30T06:00:00Z\n\nX1,albumin,30,g/L,2026-11-30T06:00:00Z\n'
		);
		expect(header).toEqual(['mrn', 'test', 'value', 'unit', 'observed_at']);
		expect(rows.map((r) => r.line)).toEqual([2, 3]);
	});
	it('reports the first problem of a row with its line and column', () => {
		const row = { line: 7, values: { mrn: 'X1', test: 'creatinine', value: '1.2 mg/dL', unit: 'mg/dL', observed_at: '2026-11-30T06:00:00Z' } };
		expect(readRow('results', row, ctx)).toEqual({
			ok: false,
			error: { line: 7, column: 'value', reason: "value '1.2 mg/dL' is not a number: use a decimal point and no unit or thousands separator" }
		});
	});
	it('reads a stop with the order id alone', () => {
		const read = readRow('orders', { line: 2, values: { mrn: 'X1', order_id: 'RX-1', status: 'stopped', stopped_at: '2026-11-30T08:00:00Z' } }, ctx);
		expect(read).toEqual({ ok: true, records: [{ kind: 'stop', index: 2, primary: true, sourceId: 'RX-1', stoppedAt: new Date('2026-11-30T08:00:00Z') }] });
	});
	it('warns when one analyte arrives in two units in the same file', () => {
		const { rows } = parseCsvText('mrn,test,value,unit,observed_at\nX1,creatinine,1.2,mg/dL,t\nX2,creatinine,97,µmol/L,t\nX2,albumin,30,g/L,t\n');
		expect(unitWarnings('results', rows)).toEqual(["creatinine arrives in 2 units in this file (mg/dL, umol/L): check that each row's unit matches its value"]);
	});
});
