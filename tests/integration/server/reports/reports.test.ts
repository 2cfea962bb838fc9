import Papa from 'papaparse';
import { beforeAll, describe, expect, it } from 'vitest';
import { reports, buildTable } from '../../../../src/lib/server/reports';
import { GET as exportTable } from '../../../../src/routes/reports/export/[table]/+server';
import { AS_OF, buildFixture, ICU, NORTH, RANGE, RULES, TZ } from './fixture';

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

describe('flags, findings, recommendations and time to action', () => {
	// Flags (one per order episode) opened Jan 5–11, with their findings (one per rule that held):
	//   F1 5th  O1 P1 3 North  high      dose-above-band
	//   F4 5th  O2 P1 3 North  low       low-albumin
	//   F2 7th  O3 P2 ICU      high      dose-above-band
	//   F3 7th  O4 P2 ICU      moderate  low-albumin (superseded: resolved when O4 stopped)
	//   F5 9th  O3 P2 ICU      moderate  trough-risk (a rule no longer in the rule set); O3's second episode
	//   F7 10th O7 P2 ICU      high      dose-above-band high, low-albumin moderate, creatinine-unstable low (joined 20:00)
	//   F6 opened on the 4th (before the range), P1: its trough-risk finding is not counted; creatinine-unstable
	//      joined it on the 6th and is.
	// → 6 flags; 9 findings: dose-above-band 3, low-albumin 3, creatinine-unstable 2, trough-risk 1.

	it('counts flags raised per day by the severity of their worst finding, one per order episode', async () => {
		const rows = await reports.flagsPerDay(RANGE, options);
		expect(rows).toEqual([
			{ day: '2026-01-05', severity: 'high', flags: 1 },
			{ day: '2026-01-05', severity: 'low', flags: 1 },
			{ day: '2026-01-07', severity: 'high', flags: 1 },
			{ day: '2026-01-07', severity: 'moderate', flags: 1 },
			{ day: '2026-01-09', severity: 'moderate', flags: 1 },
			{ day: '2026-01-10', severity: 'high', flags: 1 }
		]);
		// Wards: F1, F4 are P1's (3 North at the time); F2, F3, F5, F7 are P2's (ICU).
		const icu = await reports.flagsPerDay({ ...RANGE, wards: [ICU] }, options);
		expect(icu.reduce((n, r) => n + r.flags, 0)).toBe(4);
	});

	it('counts findings raised per day by rule, named by the active rule set or by key for a rule no longer in it', async () => {
		const rows = await reports.findingsPerDay(RANGE, options);
		const { doseAbove, lowAlbumin, creatinineUnstable, retired } = RULES;
		const row = (day: string, rule: { key: string; title: string }) => ({ day, ruleKey: rule.key, ruleTitle: rule.title, findings: 1 });
		expect(rows).toEqual([
			row('2026-01-05', doseAbove),
			row('2026-01-05', lowAlbumin),
			row('2026-01-06', creatinineUnstable), // joined F6, opened before the range
			row('2026-01-07', doseAbove),
			row('2026-01-07', lowAlbumin),
			row('2026-01-09', retired),
			row('2026-01-10', creatinineUnstable),
			row('2026-01-10', doseAbove),
			row('2026-01-10', lowAlbumin)
		]);
		// Wards: ICU has F2, F3, F5 and F7's three → 6; 3 North has F1, F4 and F6's joined finding → 3.
		const count = async (wards: string[]) => (await reports.findingsPerDay({ ...RANGE, wards }, options)).reduce((n, r) => n + r.findings, 0);
		expect([await count([ICU]), await count([NORTH])]).toEqual([6, 3]);
		// The table's columns: by total findings, ties by title; the rule no longer in the rule set keeps its key.
		const report = await reports.build(RANGE, { ...options, parts: ['findingsPerDay'] });
		expect(report.findingsRaised).toBe(9);
		expect(buildTable(report, 'findings-by-rule').columns.map((c) => c.label)).toEqual([
			'Day',
			doseAbove.title,
			lowAlbumin.title,
			creatinineUnstable.title,
			'trough-risk',
			'All findings'
		]);
	});

	it('counts a flag with three findings as one flag, one intervention and three findings', async () => {
		// Jan 10 alone holds F7 and nothing else raised: one flag, three findings; R6 (F5's) and R8 (F7's) were sent that day.
		const day = { from: '2026-01-10', to: '2026-01-10', wards: [] };
		const report = await reports.build(day, options);
		expect(report.flagsRaised).toBe(1);
		expect(report.findingsRaised).toBe(3);
		expect(report.agentsFlagged.map((a) => [a.agentName, a.flags, a.patients, a.highSeverity])).toEqual([['Ceftriaxone', 1, 1, 1]]);
		expect(report.timeToAction.map((d) => [d.measure, d.flags, d.pending])).toEqual([
			['first_action', 1, 0],
			['closure', 1, 0],
			['closure_by_team', 0, 0]
		]);
		expect(report.recommendations).toMatchObject({ sent: 2, withdrawn: 1, noAnswer: 1 });
		const byRule = buildTable(report, 'findings-by-rule');
		expect(byRule.rows).toEqual([
			{ day: '2026-01-10', [`rule:${RULES.creatinineUnstable.key}`]: 1, [`rule:${RULES.doseAbove.key}`]: 1, [`rule:${RULES.lowAlbumin.key}`]: 1, total: 3 }
		]);
		expect(buildTable(report, 'flags-by-severity').rows).toEqual([{ day: '2026-01-10', high: 1, moderate: 0, low: 0, total: 1 }]);
	});

	it('counts recommendations by outcome with both acceptance rates', async () => {
		// Sent Jan 5–11: R1 accepted, R2 modified, R3 declined, R4 withdrawn, R5 no answer (its flag F6 opened on the 4th,
		// but it was sent on the 5th), R6 no answer, R8 withdrawn (one recommendation for F7's three findings).
		// R7 was sent on the 12th → outside. Sent = 7.
		// Answered = accepted + modified + declined = 3; acceptance of answered = (1 + 1) / 3 = 0.6667; of all sent = 2 / 7 = 0.2857.
		const r = await reports.recommendationOutcomes(RANGE, options);
		expect(r).toMatchObject({ sent: 7, accepted: 1, modified: 1, declined: 1, noAnswer: 2, withdrawn: 2, answered: 3 });
		expect(r.acceptanceOfAnswered).toBeCloseTo(2 / 3, 10);
		expect(r.acceptanceOfSent).toBeCloseTo(2 / 7, 10);
		// ICU (flags F2, F3, F5, F7): R2 modified, R4 withdrawn, R6 no answer, R8 withdrawn → 1 of 1 answered accepted; 1 of 4 sent.
		const icu = await reports.recommendationOutcomes({ ...RANGE, wards: [ICU] }, options);
		expect([icu.sent, icu.answered, icu.acceptanceOfAnswered]).toEqual([4, 1, 1]);
		expect(icu.acceptanceOfSent).toBeCloseTo(1 / 4, 10);
	});

	it('computes median and 90th percentile of time to first action and to closure', async () => {
		// percentile_cont (linear interpolation between closest ranks): value at position p × (n − 1) of the sorted list.
		// First action (h): F1 10:00−09:00 = 1; F2 first person's event (claim 09:00; system 'opened'/'refreshed' ignored) − 06:00 = 3;
		//   F3 Jan 8 00:00 − Jan 7 12:00 = 12; F4 Jan 6 02:00 − Jan 5 20:00 = 6; F7 12:00 − 10:00 = 2; F5 none yet.
		//   sorted [1, 2, 3, 6, 12], n = 5: median at 2 → 3; p90 at 3.6 → 6 + 0.6 × (12 − 6) = 9.6; pending 1.
		// Closure (h): F1 6, F2 8, F3 48 (superseded), F4 12, F7 Jan 10 10:00 → Jan 11 09:00 = 23 (superseded); F5 open.
		//   sorted [6, 8, 12, 23, 48]: median at 2 → 12; p90 at 3.6 → 23 + 0.6 × 25 = 38; pending 1.
		// Closure by the team (superseded F3, F7 left out): [6, 8, 12]: median 8; p90 at 1.8 → 8 + 0.8 × 4 = 11.2; pending 1 (F5).
		const [first, closure, byTeam] = await reports.timeToAction(RANGE, options);
		expect(first).toMatchObject({ measure: 'first_action', flags: 5, pending: 1 });
		expect(first.medianH).toBeCloseTo(3, 9);
		expect(first.p90H).toBeCloseTo(9.6, 9);
		expect(closure).toMatchObject({ measure: 'closure', flags: 5, pending: 1 });
		expect(closure.medianH).toBeCloseTo(12, 9);
		expect(closure.p90H).toBeCloseTo(38, 9);
		expect(byTeam).toMatchObject({ measure: 'closure_by_team', flags: 3, pending: 1 });
		expect(byTeam.medianH).toBeCloseTo(8, 9);
		expect(byTeam.p90H).toBeCloseTo(11.2, 9);
	});

	it('lists the agents most often flagged', async () => {
		// Vancomycin: F1 (P1, high), F3 (P2) → 2 flags, 2 patients, 1 high. Gentamicin: F2 (high), F5 → 2, 1 patient, 1 high.
		// Ceftriaxone: F7 (high; three findings, one flag) → 1. Pip–tazo: F4 → 1. Ties by name.
		const agents = await reports.agentsFlagged(RANGE, options);
		expect(agents.map((a) => [a.agentName, a.flags, a.patients, a.highSeverity])).toEqual([
			['Gentamicin', 2, 1, 1],
			['Vancomycin', 2, 2, 1],
			['Ceftriaxone', 1, 1, 1],
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
		for (const key of ['flags-by-severity', 'findings-by-rule', 'recommendations', 'time-to-action', 'agents-flagged', 'dot-by-class'] as const) {
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
		// (1 + 1) / 3 = 66.7 %; (1 + 1) / 7 = 28.6 %, to one decimal place
		expect(rate('Acceptance rate, of answered')).toBe(66.7);
		expect(rate('Acceptance rate, of all sent')).toBe(28.6);
		const times = parse(await (await download('time-to-action', 'from=2026-01-05&to=2026-01-11')).text());
		expect(times.map((r) => [r['Flags measured (one per order episode)'], r['Median (h)'], r['90th percentile (h)']])).toEqual([
			[5, 3, 9.6],
			[5, 12, 38],
			[3, 8, 11.2]
		]);
	});

	it('says in the files that a flag is one per order episode and a finding one per rule that held', async () => {
		process.env.EBBLINE_TIME_ZONE = TZ;
		// Jan 10: F7 alone, one flag holding three findings.
		const query = 'from=2026-01-10&to=2026-01-10';
		const findings = parse(await (await download('findings-by-rule', query)).text());
		expect(findings).toEqual([
			{
				Day: '2026-01-10',
				[`${RULES.creatinineUnstable.title} (findings)`]: 1,
				[`${RULES.doseAbove.title} (findings)`]: 1,
				[`${RULES.lowAlbumin.title} (findings)`]: 1,
				'All findings (one per rule that held)': 3
			}
		]);
		const flagsFile = parse(await (await download('flags-by-severity', query)).text());
		expect(flagsFile).toEqual([
			{ Day: '2026-01-10', '◆ High (flags)': 1, '◈ Moderate (flags)': 0, '◇ Low (flags)': 0, 'All flags (one per order episode)': 1 }
		]);
		const agents = parse(await (await download('agents-flagged', query)).text());
		expect(agents.map((r) => [r['Agent'], r['Flags (one per order episode)']])).toEqual([['Ceftriaxone', 1]]);
		// the old per-rule flag table is gone, not quietly answering with findings under its name
		expect((await download('flags-by-rule', query).catch((e) => e)).status).toBe(404);
	});

	it('refuses an unknown table and a bad range', async () => {
		expect((await download('nonsense', 'from=2026-01-05&to=2026-01-11').catch((e) => e)).status).toBe(404);
		expect((await download('dot-by-agent', 'from=2026-01-11&to=2026-01-05').catch((e) => e)).status).toBe(400);
	});

	it('refuses a physician', async () => {
		const url = new URL('http://localhost/reports/export/dot-by-agent?from=2026-01-05&to=2026-01-11');
		const result = await Promise.resolve(
			exportTable({ locals: { user: { ...admin, role: 'physician' } }, url, params: { table: 'dot-by-agent' } } as never)
		).catch((e) => e);
		expect(result.status).toBe(403);
	});
});

describe('all wards and one ward at a time', () => {
	// common practice: a report over all wards counts what the per-ward reports count, added up (the all-wards
	// path skips finding each flag's ward; this keeps the two paths in step)
	it('counts the same flags and findings over all wards as over each ward added up', async () => {
		const wards = await reports.listWards();
		expect(wards.length).toBeGreaterThan(1);
		const total = (rows: { flags?: number; findings?: number }[]) => rows.reduce((n, r) => n + (r.flags ?? r.findings ?? 0), 0);
		const all = await reports.flagsPerDay(RANGE, options);
		const allFindings = await reports.findingsPerDay(RANGE, options);
		let flags = 0;
		let findings = 0;
		for (const ward of wards) {
			flags += total(await reports.flagsPerDay({ ...RANGE, wards: [ward] }, options));
			findings += total(await reports.findingsPerDay({ ...RANGE, wards: [ward] }, options));
		}
		expect(total(all)).toBeGreaterThan(0);
		expect(flags).toBe(total(all));
		expect(findings).toBe(total(allFindings));
	});
});
