import Papa from 'papaparse';
import { beforeAll, describe, expect, it } from 'vitest';
import * as reports from '../../../src/lib/server/reports';
import { buildTable } from '../../../src/lib/server/report-tables';
import { GET as exportTable } from '../../../src/routes/reports/export/[table]/+server';
import { AS_OF, buildFixture, ICU, NORTH, RANGE, TZ } from './fixture';

const options = { timeZone: TZ, asOf: AS_OF };

beforeAll(async () => {
	await buildFixture();
});

describe('antimicrobial use (DOT per 1,000 patient-days)', () => {
	// Source for the definitions checked here: CDC NHSN Patient Safety Component Manual, Antimicrobial
	// Use and Resistance (AUR) Module, Antimicrobial Use option — one antimicrobial day per agent per
	// calendar day on which any amount was given; "days present" = days on which the patient was in the
	// location for any part of the day; group totals add the agents' days.
	//
	// Scheduled doses (startAt + k × intervalH, before stoppedAt), range Jan 5–11, Europe/London (= UTC in January):
	//   O1 P1 vancomycin q12h 5th 08:00 → stop 7th 08:00: 5th 08,20; 6th 08,20 (7th 08:00 is the stop: not given) → days 5, 6
	//   O2 P1 pip–tazo q8h 4th 14:00 → stop 6th 06:00: 4th 14,22 (before range); 5th 06,14,22 → day 5
	//   O3 P2 gentamicin q48h from 6th 23:00, active: 6th 23, 8th 23, 10th 23 (12th outside) → days 6, 8, 10; 7, 9, 11 have no dose → none
	//   O4 P2 vancomycin q24h 7th 10:00 → stop 9th 12:00: 7th, 8th, 9th 10:00 → days 7, 8, 9
	//   O5 P1 vancomycin q24h 6th 09:00 → stop 6th 10:00: 6th 09:00 → day 6, already counted for P1 by O1 (one DOT per agent per day)
	//   O6 P3 meropenem q8h since Dec 28: the 5th 00:00 dose falls when P3 has left (discharged 5th 00:00) → none
	//   O7 P2 ceftriaxone q24h 10th 09:00 → stop 11th 09:00: 10th 09:00 → day 10
	// DOT: vancomycin P1 {5,6} + P2 {7,8,9} = 5; gentamicin 3; pip–tazo 1; ceftriaxone 1; meropenem 0 → total 10.
	//   Two agents on one day count two: P1 on the 5th (vancomycin + pip–tazo), P2 on the 10th (gentamicin + ceftriaxone).
	// Patient-days (days present): P1 5,6,7,8 = 4; P2 6..11 = 6; P3 0 (left at 00:00 on the 5th) → 10.
	// Rates per 1,000: vancomycin 5/10×1000 = 500; gentamicin 300; pip–tazo 100; ceftriaxone 100; total 1000.
	// Classes: glycopeptide 5 (500), aminoglycoside 3 (300), beta-lactam 1 + 1 = 2 (200, 2 agents).

	it('counts DOT and patient-days across all wards as worked out by hand', async () => {
		const use = await reports.antimicrobialUse(RANGE, options);
		expect(use.patientDays).toBe(10);
		expect(use.byAgent.map((a) => [a.agentName, a.dot, a.dotPer1000PatientDays])).toEqual([
			['Vancomycin', 5, 500],
			['Gentamicin', 3, 300],
			['Ceftriaxone', 1, 100],
			['Piperacillin–tazobactam', 1, 100]
		]);
		expect(use.totalDot).toBe(10);
		expect(use.totalDotPer1000PatientDays).toBe(1000);
		expect(use.byClass.map((c) => [c.agentClass, c.agents, c.dot, c.dotPer1000PatientDays])).toEqual([
			['glycopeptide', 1, 5, 500],
			['aminoglycoside', 1, 3, 300],
			['beta-lactam', 2, 2, 200]
		]);
	});

	it('counts two agents on the same day as two DOT, and a day without a dose as none', async () => {
		// Jan 5 alone: P1 has vancomycin and pip–tazo → 2 DOT; P1 is the only patient present → 1 patient-day.
		const jan5 = await reports.antimicrobialUse({ from: '2026-01-05', to: '2026-01-05', wards: [] }, options);
		expect(jan5.totalDot).toBe(2);
		expect(jan5.patientDays).toBe(1);
		// Jan 9 alone: P2's only dose is vancomycin at 10:00 (gentamicin is q48h, no dose that day) → 1 DOT.
		const jan9 = await reports.antimicrobialUse({ from: '2026-01-09', to: '2026-01-09', wards: [] }, options);
		expect(jan9.byAgent.map((a) => [a.agentName, a.dot])).toEqual([['Vancomycin', 1]]);
		// Jan 11 alone: no dose of anything (gentamicin next due on the 12th, ceftriaxone stopped at 09:00 before its 2nd dose) → 0 DOT,
		// while P2 is present → 1 patient-day.
		const jan11 = await reports.antimicrobialUse({ from: '2026-01-11', to: '2026-01-11', wards: [] }, options);
		expect(jan11.totalDot).toBe(0);
		expect(jan11.patientDays).toBe(1);
		expect(jan11.totalDotPer1000PatientDays).toBe(0);
	});

	it('keeps numerator and denominator to the chosen wards', async () => {
		// ICU: P2 only → vancomycin 3 + gentamicin 3 + ceftriaxone 1 = 7 DOT over 6 patient-days = 1166.67 per 1,000.
		const icu = await reports.antimicrobialUse({ ...RANGE, wards: [ICU] }, options);
		expect(icu.patientDays).toBe(6);
		expect(icu.totalDot).toBe(7);
		expect(icu.totalDotPer1000PatientDays).toBeCloseTo((7 / 6) * 1000, 6);
		// 3 North: P1 (4 days) and P3 (none) → vancomycin 2 + pip–tazo 1 = 3 DOT / 4 = 750.
		const north = await reports.antimicrobialUse({ ...RANGE, wards: [NORTH] }, options);
		expect([north.patientDays, north.totalDot, north.totalDotPer1000PatientDays]).toEqual([4, 3, 750]);
	});

	it('cuts calendar days in the hospital time zone', async () => {
		// Asia/Tokyo is UTC+9 all year: Jan 7 in Tokyo runs from Jan 6 15:00 to Jan 7 15:00 UTC.
		// Doses in that window: O1 vancomycin 6th 20:00 (P1), O3 gentamicin 6th 23:00 (P2), O4 vancomycin 7th 10:00 (P2);
		// O1's 7th 08:00 is its stop time, not given. → vancomycin 2 (P1 and P2), gentamicin 1; both patients present → 2 patient-days.
		const tokyo = await reports.antimicrobialUse({ from: '2026-01-07', to: '2026-01-07', wards: [] }, { timeZone: 'Asia/Tokyo', asOf: AS_OF });
		expect(tokyo.byAgent.map((a) => [a.agentName, a.dot])).toEqual([
			['Vancomycin', 2],
			['Gentamicin', 1]
		]);
		expect(tokyo.patientDays).toBe(2);
	});

	it('counts no dose and no stay after the moment the report is run', async () => {
		// Run at Jan 8 12:00: gentamicin's 8th 23:00 dose has not happened yet → P2's gentamicin days are the 6th only;
		// P2 present 6,7,8 (3 days), P1 5..8 (4 days) → 7 patient-days.
		const early = await reports.antimicrobialUse(RANGE, { timeZone: TZ, asOf: new Date('2026-01-08T12:00:00Z') });
		expect(early.byAgent.find((a) => a.agentName === 'Gentamicin')?.dot).toBe(1);
		expect(early.patientDays).toBe(7);
	});
});

describe('flags, recommendations and time to action', () => {
	it('counts flags raised per day by rule and by severity', async () => {
		// Flags opened Jan 5–11: F1 5th renal-dose-high high; F4 5th albumin-low low; F2 7th renal-dose-high high;
		// F3 7th albumin-low moderate; F5 10th trough-risk moderate. F6 (4th) is before the range. → 5 flags.
		const rows = await reports.flagsPerDay(RANGE, options);
		expect(rows).toEqual([
			{ day: '2026-01-05', ruleKey: 'albumin-low', severity: 'low', flags: 1 },
			{ day: '2026-01-05', ruleKey: 'renal-dose-high', severity: 'high', flags: 1 },
			{ day: '2026-01-07', ruleKey: 'albumin-low', severity: 'moderate', flags: 1 },
			{ day: '2026-01-07', ruleKey: 'renal-dose-high', severity: 'high', flags: 1 },
			{ day: '2026-01-10', ruleKey: 'trough-risk', severity: 'moderate', flags: 1 }
		]);
		// Wards: F1, F4 are P1's (3 North at the time); F2, F3, F5 are P2's (ICU).
		const icu = await reports.flagsPerDay({ ...RANGE, wards: [ICU] }, options);
		expect(icu.reduce((n, r) => n + r.flags, 0)).toBe(3);
	});

	it('counts recommendations by outcome with both acceptance rates', async () => {
		// Sent Jan 5–11: R1 accepted, R2 modified, R3 declined, R4 withdrawn, R5 no answer (its flag F6 opened on the 4th,
		// but it was sent on the 5th), R6 no answer. R7 was sent on the 12th → outside. Sent = 6.
		// Answered = accepted + modified + declined = 3; acceptance of answered = (1 + 1) / 3 = 0.6667; of all sent = 2 / 6 = 0.3333.
		const r = await reports.recommendationOutcomes(RANGE, options);
		expect(r).toMatchObject({ sent: 6, accepted: 1, modified: 1, declined: 1, noAnswer: 2, withdrawn: 1, answered: 3 });
		expect(r.acceptanceOfAnswered).toBeCloseTo(2 / 3, 10);
		expect(r.acceptanceOfSent).toBeCloseTo(2 / 6, 10);
		// ICU (flags F2, F3, F5): R2 modified, R4 withdrawn, R6 no answer → 1 of 1 answered accepted; 1 of 3 sent.
		const icu = await reports.recommendationOutcomes({ ...RANGE, wards: [ICU] }, options);
		expect([icu.sent, icu.answered, icu.acceptanceOfAnswered]).toEqual([3, 1, 1]);
		expect(icu.acceptanceOfSent).toBeCloseTo(1 / 3, 10);
	});

	it('computes median and 90th percentile of time to first action and to closure', async () => {
		// percentile_cont (linear interpolation between closest ranks): value at position p × (n − 1) of the sorted list.
		// First action (h): F1 10:00−09:00 = 1; F2 first person's event (claim 09:00; system 'opened'/'refreshed' ignored) − 06:00 = 3;
		//   F3 Jan 8 00:00 − Jan 7 12:00 = 12; F4 Jan 6 02:00 − Jan 5 20:00 = 6; F5 none yet.
		//   sorted [1, 3, 6, 12], n = 4: median at 1.5 → (3 + 6)/2 = 4.5; p90 at 2.7 → 6 + 0.7 × (12 − 6) = 10.2; pending 1.
		// Closure (h): F1 6, F2 8, F3 48 (superseded), F4 12; F5 open.
		//   sorted [6, 8, 12, 48]: median at 1.5 → 10; p90 at 2.7 → 12 + 0.7 × 36 = 37.2; pending 1.
		// Closure by the team (superseded F3 left out): [6, 8, 12]: median 8; p90 at 1.8 → 8 + 0.8 × 4 = 11.2; pending 1 (F5).
		const [first, closure, byTeam] = await reports.timeToAction(RANGE, options);
		expect(first).toMatchObject({ measure: 'first_action', flags: 4, pending: 1 });
		expect(first.medianH).toBeCloseTo(4.5, 9);
		expect(first.p90H).toBeCloseTo(10.2, 9);
		expect(closure).toMatchObject({ measure: 'closure', flags: 4, pending: 1 });
		expect(closure.medianH).toBeCloseTo(10, 9);
		expect(closure.p90H).toBeCloseTo(37.2, 9);
		expect(byTeam).toMatchObject({ measure: 'closure_by_team', flags: 3, pending: 1 });
		expect(byTeam.medianH).toBeCloseTo(8, 9);
		expect(byTeam.p90H).toBeCloseTo(11.2, 9);
	});

	it('lists the agents most often flagged', async () => {
		// Vancomycin: F1 (P1, high), F3 (P2) → 2 flags, 2 patients, 1 high. Gentamicin: F2 (high), F5 → 2, 1 patient, 1 high.
		// Pip–tazo: F4 → 1. Ties by name.
		const agents = await reports.agentsFlagged(RANGE, options);
		expect(agents.map((a) => [a.agentName, a.flags, a.patients, a.highSeverity])).toEqual([
			['Gentamicin', 2, 1, 1],
			['Vancomycin', 2, 2, 1],
			['Piperacillin–tazobactam', 1, 1, 0]
		]);
	});

	it('reports nothing for a range with no activity', async () => {
		const report = await reports.build({ from: '2025-06-01', to: '2025-06-30', wards: [] }, options);
		expect(reports.isEmpty(report)).toBe(true);
		expect(report.recommendations.acceptanceOfAnswered).toBeNull();
		expect(report.timeToAction.every((d) => d.flags === 0 && d.medianH === null)).toBe(true);
		expect(report.antimicrobialUse.totalDotPer1000PatientDays).toBeNull();
	});
});

describe('CSV export', () => {
	const admin = { id: '00000000-0000-0000-0000-000000000000', email: 'admin@larkspur.test', displayName: 'Admin', role: 'admin' as const };

	async function download(table: string, query: string) {
		const url = new URL(`http://localhost/reports/export/${table}?${query}`);
		const response = await exportTable({ locals: { user: admin }, url, params: { table } } as never);
		return response;
	}

	function parse(text: string) {
		const parsed = Papa.parse<Record<string, unknown>>(text, { header: true, dynamicTyping: true, skipEmptyLines: true });
		expect(parsed.errors).toEqual([]);
		return parsed.data;
	}

	it('exports DOT by agent that parses back to the same numbers, with a file name', async () => {
		process.env.EBBLINE_TIME_ZONE = TZ;
		const response = await download('dot-by-agent', 'from=2026-01-05&to=2026-01-11');
		expect(response.status).toBe(200);
		expect(response.headers.get('content-type')).toBe('text/csv; charset=utf-8');
		expect(response.headers.get('content-disposition')).toBe('attachment; filename="ebbline-dot-by-agent-2026-01-05-to-2026-01-11-all-wards.csv"');
		const rows = parse(await response.text());
		// Same hand-worked values as above: vancomycin 5 DOT → 500 per 1,000 of 10 patient-days … all agents 10 → 1000.
		expect(rows.map((r) => [r['Agent'], r['DOT (days)'], r['DOT per 1,000 patient-days'], r['Patient-days (days)']])).toEqual([
			['Vancomycin', 5, 500, 10],
			['Gentamicin', 3, 300, 10],
			['Ceftriaxone', 1, 100, 10],
			['Piperacillin–tazobactam', 1, 100, 10],
			['All agents', 10, 1000, 10]
		]);
	});

	it('exports every table with the numbers the page shows, for a ward selection', async () => {
		process.env.EBBLINE_TIME_ZONE = TZ;
		const report = await reports.build({ ...RANGE, wards: [ICU] }, { timeZone: TZ });
		for (const key of ['flags-by-rule', 'flags-by-severity', 'recommendations', 'time-to-action', 'agents-flagged', 'dot-by-class'] as const) {
			const response = await download(key, `from=2026-01-05&to=2026-01-11&ward=${encodeURIComponent(ICU)}`);
			expect(response.headers.get('content-disposition')).toContain(`ebbline-${key}-2026-01-05-to-2026-01-11-ICU.csv`);
			const rows = parse(await response.text());
			const table = buildTable(report, key);
			expect(rows.length).toBe(table.rows.length);
			rows.forEach((row, i) => {
				const values = Object.values(row).map((v) => (v === null ? null : v));
				const expected = table.columns.map((c) => table.rows[i][c.key] ?? null).map((v) => (v === '' ? null : v));
				expect(values).toEqual(expected);
			});
		}
	});

	it('writes the acceptance rates and percentiles as worked out by hand', async () => {
		process.env.EBBLINE_TIME_ZONE = TZ;
		const recs = parse(await (await download('recommendations', 'from=2026-01-05&to=2026-01-11')).text());
		const rate = (label: string) => recs.find((r) => r['Outcome'] === label)?.['Share of sent (%)'];
		// (1 + 1) / 3 = 66.7 %; (1 + 1) / 6 = 33.3 %, to one decimal place
		expect(rate('Acceptance rate, of answered')).toBe(66.7);
		expect(rate('Acceptance rate, of all sent')).toBe(33.3);
		const times = parse(await (await download('time-to-action', 'from=2026-01-05&to=2026-01-11')).text());
		expect(times.map((r) => [r['Flags measured'], r['Median (h)'], r['90th percentile (h)']])).toEqual([
			[4, 4.5, 10.2],
			[4, 10, 37.2],
			[3, 8, 11.2]
		]);
	});

	it('refuses an unknown table and a bad range', async () => {
		expect((await download('nonsense', 'from=2026-01-05&to=2026-01-11').catch((e) => e)).status).toBe(404);
		expect((await download('dot-by-agent', 'from=2026-01-11&to=2026-01-05').catch((e) => e)).status).toBe(400);
	});

	it('refuses a physician', async () => {
		const url = new URL('http://localhost/reports/export/dot-by-agent?from=2026-01-05&to=2026-01-11');
		const result = await Promise.resolve(exportTable({ locals: { user: { ...admin, role: 'physician' } }, url, params: { table: 'dot-by-agent' } } as never)).catch((e) => e);
		expect(result.status).toBe(403);
	});
});
