import Papa from 'papaparse';
import { describe, expect, it } from 'vitest';
import { BOM, csvCell, safeFileName, toCsv } from '../../../../src/lib/server/http';
import { buildTable, round, ruleColumns } from '../../../../src/lib/server/reports';
import type { StewardshipReport } from '../../../../src/lib/server/reports';

describe('CSV (RFC 4180 quoting)', () => {
	it('quotes a field holding a comma, a quote or a line break, doubling inner quotes', () => {
		expect(csvCell('plain')).toBe('plain');
		expect(csvCell('a,b')).toBe('"a,b"');
		expect(csvCell('say "when"')).toBe('"say ""when"""');
		expect(csvCell('two\r\nlines')).toBe('"two\r\nlines"');
		expect(csvCell(' padded ')).toBe('" padded "');
	});
	it('writes numbers as they are and empty cells for null', () => {
		expect(csvCell(1166.7)).toBe('1166.7');
		expect(csvCell(0)).toBe('0');
		expect(csvCell(null)).toBe('');
		expect(csvCell(Number.NaN)).toBe('');
	});
	it('defuses text a spreadsheet would run as a formula (OWASP, CSV Injection)', () => {
		expect(csvCell('=SUM(A1)')).toBe("'=SUM(A1)");
		expect(csvCell('+1')).toBe("'+1");
		expect(csvCell('@cmd')).toBe("'@cmd");
		expect(csvCell('-x,y')).toBe('"\'-x,y"');
	});
	it('parses back to the same cells', () => {
		const rows = [
			['Piperacillin–tazobactam', 1, 100],
			['comma, "quote"\nnew line', 2.5, null]
		];
		const text = toCsv(['Agent', 'DOT', 'Rate'], rows);
		expect(text.startsWith(BOM)).toBe(true);
		expect(text.endsWith('\r\n')).toBe(true);
		const parsed = Papa.parse<unknown[]>(text, { dynamicTyping: true, skipEmptyLines: true });
		expect(parsed.errors).toEqual([]);
		expect(parsed.data).toEqual([['Agent', 'DOT', 'Rate'], ...rows]);
	});
	it('keeps file names to characters every browser accepts', () => {
		expect(safeFileName('ebbline-dot-by-agent-2026-01-05-to-2026-01-11-3 North Medicine_ICU.csv')).toBe(
			'ebbline-dot-by-agent-2026-01-05-to-2026-01-11-3-North-Medicine_ICU.csv'
		);
		expect(safeFileName('a"b\r\nc.csv')).toBe('a-b-c.csv');
	});
});

function report(partial: Partial<StewardshipReport>): StewardshipReport {
	return {
		filter: { from: '2026-01-05', to: '2026-01-07', wards: [] },
		timeZone: 'Europe/London',
		asOf: '2026-01-20T00:00:00.000Z',
		days: ['2026-01-05', '2026-01-06', '2026-01-07'],
		flagsPerDay: [],
		flagsRaised: 0,
		findingsPerDay: [],
		findingsRaised: 0,
		recommendations: {
			sent: 0,
			accepted: 0,
			modified: 0,
			declined: 0,
			noAnswer: 0,
			withdrawn: 0,
			answered: 0,
			acceptanceOfAnswered: null,
			acceptanceOfSent: null
		},
		timeToAction: [],
		agentsFlagged: [],
		antimicrobialUse: { patientDays: 0, totalDot: 0, totalDotPer1000PatientDays: null, byAgent: [], byClass: [] },
		...partial
	};
}

describe('report tables', () => {
	it('rounds for publication and keeps null as null', () => {
		expect(round(1166.6666, 1)).toBe(1166.7);
		expect(round(10.25, 1)).toBe(10.3);
		expect(round(null, 1)).toBeNull();
	});

	it('lays findings out one row per day with a zero for a quiet day, even for a rule called "total"', () => {
		const table = buildTable(
			report({
				findingsPerDay: [
					{ day: '2026-01-05', ruleKey: 'total', ruleTitle: 'total', findings: 2 },
					{ day: '2026-01-05', ruleKey: 'low-albumin-highly-bound', ruleTitle: 'Low albumin on a highly protein-bound agent', findings: 1 },
					{ day: '2026-01-07', ruleKey: 'low-albumin-highly-bound', ruleTitle: 'Low albumin on a highly protein-bound agent', findings: 4 }
				]
			}),
			'findings-by-rule'
		);
		// columns by total findings (low albumin 5, then "total" 2), labelled by rule title, saying what is counted
		expect(table.columns.map((c) => [c.label, c.unit])).toEqual([
			['Day', undefined],
			['Low albumin on a highly protein-bound agent', 'findings'],
			['total', 'findings'],
			['All findings', 'one per rule that held']
		]);
		expect(table.rows).toEqual([
			{ day: '2026-01-05', 'rule:low-albumin-highly-bound': 1, 'rule:total': 2, total: 3 },
			{ day: '2026-01-06', 'rule:low-albumin-highly-bound': 0, 'rule:total': 0, total: 0 },
			{ day: '2026-01-07', 'rule:low-albumin-highly-bound': 4, 'rule:total': 0, total: 4 }
		]);
	});

	it('tells apart two rules that share a title by their keys', () => {
		const columns = ruleColumns(
			report({
				findingsPerDay: [
					{ day: '2026-01-05', ruleKey: 'aki', ruleTitle: 'Acute kidney injury', findings: 1 },
					{ day: '2026-01-05', ruleKey: 'aki-icu', ruleTitle: 'Acute kidney injury', findings: 3 },
					{ day: '2026-01-06', ruleKey: 'creatinine-unstable', ruleTitle: 'Creatinine unstable', findings: 1 }
				]
			})
		);
		expect(columns).toEqual([
			{ key: 'aki-icu', label: 'Acute kidney injury (aki-icu)' },
			{ key: 'aki', label: 'Acute kidney injury (aki)' },
			{ key: 'creatinine-unstable', label: 'Creatinine unstable' }
		]);
	});

	it('lays flags out by severity, one per order episode', () => {
		const table = buildTable(
			report({
				flagsPerDay: [
					{ day: '2026-01-05', severity: 'high', flags: 1 },
					{ day: '2026-01-07', severity: 'low', flags: 2 }
				]
			}),
			'flags-by-severity'
		);
		expect(table.columns.map((c) => [c.key, c.unit])).toEqual([
			['day', undefined],
			['high', 'flags'],
			['moderate', 'flags'],
			['low', 'flags'],
			['total', 'one per order episode']
		]);
		expect(table.rows.map((r) => r.total)).toEqual([1, 0, 2]);
	});

	it('writes both acceptance rates as percentages, and a dash when nothing was answered', () => {
		const rows = (r: StewardshipReport['recommendations']) => buildTable(report({ recommendations: r }), 'recommendations').rows;
		const some = rows({
			sent: 6,
			accepted: 1,
			modified: 1,
			declined: 1,
			noAnswer: 2,
			withdrawn: 1,
			answered: 3,
			acceptanceOfAnswered: 2 / 3,
			acceptanceOfSent: 2 / 6
		});
		expect(some.find((r) => r.outcome === 'Acceptance rate, of answered')?.percentOfSent).toBe(66.7);
		expect(some.find((r) => r.outcome === 'Acceptance rate, of all sent')?.percentOfSent).toBe(33.3);
		expect(some.find((r) => r.outcome === 'No answer yet')).toEqual({ outcome: 'No answer yet', count: 2, percentOfSent: 33.3 });
		const none = rows({
			sent: 0,
			accepted: 0,
			modified: 0,
			declined: 0,
			noAnswer: 0,
			withdrawn: 0,
			answered: 0,
			acceptanceOfAnswered: null,
			acceptanceOfSent: null
		});
		expect(none.find((r) => r.outcome === 'Acceptance rate, of answered')?.percentOfSent).toBeNull();
	});
});
