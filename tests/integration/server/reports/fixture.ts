// A small hand-built stewardship fixture, inserted through Drizzle. Every number the report tests
// expect is worked out by hand from the rows below (see reports.test.ts). January 2026: the hospital
// zone Europe/London is on GMT then, so local times equal the UTC times written here.
import { getDb } from '../../../../src/lib/server/db';
import {
	agents,
	assessments,
	encounters,
	flagEvents,
	flagFindings,
	flags,
	orders,
	patients,
	recommendations,
	ruleVersions,
	users
} from '../../../../src/lib/server/db/schema';

export const TZ = 'Europe/London';
export const AS_OF = new Date('2026-01-20T00:00:00Z');
export const RANGE = { from: '2026-01-05', to: '2026-01-11', wards: [] as string[] };
export const NORTH = '3 North Medicine';
export const ICU = 'ICU';
/** Rules of the default rule set (the active one in a fresh database) with their titles, and one no longer in it. */
export const RULES = {
	doseAbove: { key: 'dose-above-band', title: 'Daily dose above the renal band' },
	lowAlbumin: { key: 'low-albumin-highly-bound', title: 'Low albumin on a highly protein-bound agent' },
	creatinineUnstable: { key: 'creatinine-unstable', title: 'Creatinine unstable' },
	retired: { key: 'trough-risk', title: 'trough-risk' }
} as const;

const t = (iso: string) => new Date(`${iso}Z`);
let uniq = 0;
const u = (prefix: string) => `${prefix}-${Date.now().toString(36)}-${++uniq}`;

export async function buildFixture() {
	const db = getDb();
	const [pharmacist, physician] = await db
		.insert(users)
		.values([
			{ email: `${u('rx')}@larkspur.test`, displayName: 'Report Pharmacist', role: 'pharmacist', passwordHash: 'not-a-real-hash' },
			{ email: `${u('md')}@larkspur.test`, displayName: 'Report Physician', role: 'physician', passwordHash: 'not-a-real-hash' }
		])
		.returning();

	const [p1, p2, p3] = await db
		.insert(patients)
		.values(
			['Ash', 'Birch', 'Cedar'].map((familyName) => ({
				mrn: u('LB'),
				givenName: 'Invented',
				familyName,
				birthDate: '1960-01-01',
				sex: 'female' as const
			}))
		)
		.returning();

	// P1: 3 North, Jan 4 10:00 → Jan 8 09:00. P2: ICU from Jan 6 22:00, still in.
	// P3: 3 North, left at midnight Jan 4→5 exactly (no part of Jan 5).
	const [e1, e2, e3] = await db
		.insert(encounters)
		.values([
			{ patientId: p1.id, ward: NORTH, admittedAt: t('2026-01-04T10:00'), dischargedAt: t('2026-01-08T09:00') },
			{ patientId: p2.id, ward: ICU, admittedAt: t('2026-01-06T22:00'), dischargedAt: null },
			{ patientId: p3.id, ward: NORTH, admittedAt: t('2025-12-20T08:00'), dischargedAt: t('2026-01-05T00:00') }
		])
		.returning();

	const agent = (code: string, name: string, agentClass: string) => ({
		code: u(code),
		name,
		agentClass,
		params: {} as never // the report never reads kinetic parameters
	});
	const [vanc, gent, pip, ctx, mero] = await db
		.insert(agents)
		.values([
			agent('J01XA01', 'Vancomycin', 'glycopeptide'),
			agent('J01GB03', 'Gentamicin', 'aminoglycoside'),
			agent('J01CR05', 'Piperacillin–tazobactam', 'beta-lactam'),
			agent('J01DD04', 'Ceftriaxone', 'beta-lactam'),
			agent('J01DH02', 'Meropenem', 'carbapenem')
		])
		.returning();

	const order = (patientId: string, encounterId: string, agentId: string, startAt: string, intervalH: number, stoppedAt: string | null) => ({
		patientId,
		encounterId,
		agentId,
		doseMg: 1000,
		intervalH,
		infusionH: 0.5,
		status: stoppedAt ? ('stopped' as const) : ('active' as const),
		startAt: t(startAt),
		stoppedAt: stoppedAt ? t(stoppedAt) : null
	});
	const [o1, o2, o3, o4, , , o7] = await db
		.insert(orders)
		.values([
			order(p1.id, e1.id, vanc.id, '2026-01-05T08:00', 12, '2026-01-07T08:00'), // O1
			order(p1.id, e1.id, pip.id, '2026-01-04T14:00', 8, '2026-01-06T06:00'), // O2
			order(p2.id, e2.id, gent.id, '2026-01-06T23:00', 48, null), // O3
			order(p2.id, e2.id, vanc.id, '2026-01-07T10:00', 24, '2026-01-09T12:00'), // O4
			order(p1.id, e1.id, vanc.id, '2026-01-06T09:00', 24, '2026-01-06T10:00'), // O5
			order(p3.id, e3.id, mero.id, '2025-12-28T08:00', 8, null), // O6
			order(p2.id, e2.id, ctx.id, '2026-01-10T09:00', 24, '2026-01-11T09:00') // O7
		])
		.returning();

	const [rules] = await db
		.insert(ruleVersions)
		.values({ version: 1000 + uniq, status: 'draft', rules: [] })
		.returning();
	const assessmentFor = async (o: typeof o1, at: string) => {
		const [a] = await db
			.insert(assessments)
			.values({ orderId: o.id, patientId: o.patientId, at: t(at), complete: true, result: {} as never, trace: [] })
			.returning();
		return a.id;
	};
	type Severity = 'high' | 'moderate' | 'low';
	type Finding = { rule: { key: string }; severity: Severity; raisedAt?: string };
	/**
	 * A flag and its findings, as the engine leaves them: one open flag per order at most; the flag's
	 * headline is its worst finding (listed first); each finding is raised at its own assessment (the
	 * flag's opening one unless it joined later); a flag that closed itself as superseded has every
	 * finding resolved, a flag a person closed keeps them unresolved (they held when it closed).
	 */
	const flag = async (
		o: typeof o1,
		openedAt: string,
		end: { firstActionAt?: string; closedAt?: string; outcome?: 'accepted' | 'modified' | 'declined' | 'no_action' | 'superseded' },
		findings: [Finding, ...Finding[]]
	) => {
		const openedAssessment = await assessmentFor(o, openedAt);
		const headline = findings[0];
		const [f] = await db
			.insert(flags)
			.values({
				orderId: o.id,
				patientId: o.patientId,
				ruleKey: headline.rule.key,
				ruleVersionId: rules.id,
				assessmentId: openedAssessment,
				state: end.outcome ? 'closed' : 'new',
				outcome: end.outcome ?? null,
				severity: headline.severity,
				priority: 1,
				finding: 'fixture',
				facts: {},
				openedAt: t(openedAt),
				firstActionAt: end.firstActionAt ? t(end.firstActionAt) : null,
				closedAt: end.closedAt ? t(end.closedAt) : null
			})
			.returning();
		const superseded = end.outcome === 'superseded' && end.closedAt ? t(end.closedAt) : null;
		for (const finding of findings) {
			const raisedAt = finding.raisedAt ?? openedAt;
			const raisedAssessment = raisedAt === openedAt ? openedAssessment : await assessmentFor(o, raisedAt);
			await db.insert(flagFindings).values({
				flagId: f.id,
				ruleKey: finding.rule.key,
				ruleVersionId: rules.id,
				severity: finding.severity,
				priority: 1,
				text: 'fixture',
				assessmentId: raisedAssessment,
				raisedAssessmentId: raisedAssessment,
				raisedAt: t(raisedAt),
				resolvedAt: superseded,
				resolvedReason: superseded ? 'order stopped' : null
			});
		}
		return f;
	};

	const { doseAbove, lowAlbumin, creatinineUnstable, retired } = RULES;
	const f1 = await flag(o1, '2026-01-05T09:00', { firstActionAt: '2026-01-05T10:00', closedAt: '2026-01-05T15:00', outcome: 'accepted' }, [
		{ rule: doseAbove, severity: 'high' }
	]);
	// F2 has no firstActionAt: its first action is the pharmacist's claim at 09:00 (system events ignored)
	const f2 = await flag(o3, '2026-01-07T06:00', { closedAt: '2026-01-07T14:00', outcome: 'modified' }, [{ rule: doseAbove, severity: 'high' }]);
	const f3 = await flag(o4, '2026-01-07T12:00', { firstActionAt: '2026-01-08T00:00', closedAt: '2026-01-09T12:00', outcome: 'superseded' }, [
		{ rule: lowAlbumin, severity: 'moderate' }
	]);
	const f4 = await flag(o2, '2026-01-05T20:00', { firstActionAt: '2026-01-06T02:00', closedAt: '2026-01-06T08:00', outcome: 'declined' }, [
		{ rule: lowAlbumin, severity: 'low' }
	]);
	// F5 is O3's second episode: F2 closed on the 7th, the order was flagged again on the 9th.
	const f5 = await flag(o3, '2026-01-09T08:00', {}, [{ rule: retired, severity: 'moderate' }]);
	// F6 opened before the range (Jan 4): neither it nor its first finding counts as raised, but its recommendation
	// sent on Jan 5 does, and so does the finding that joined it on Jan 6.
	const f6 = await flag(o1, '2026-01-04T23:00', {}, [
		{ rule: retired, severity: 'low' },
		{ rule: creatinineUnstable, severity: 'low', raisedAt: '2026-01-06T08:00' }
	]);
	// F7: one flag, three findings, all on Jan 10 (the third joined at a later assessment); it closed itself when
	// the order stopped on the 11th.
	const f7 = await flag(o7, '2026-01-10T10:00', { firstActionAt: '2026-01-10T12:00', closedAt: '2026-01-11T09:00', outcome: 'superseded' }, [
		{ rule: doseAbove, severity: 'high' },
		{ rule: lowAlbumin, severity: 'moderate' },
		{ rule: creatinineUnstable, severity: 'low', raisedAt: '2026-01-10T20:00' }
	]);

	await db.insert(flagEvents).values([
		{ flagId: f2.id, actorId: null, kind: 'opened', toState: 'new', at: t('2026-01-07T06:00') },
		{ flagId: f2.id, actorId: null, kind: 'refreshed', at: t('2026-01-07T07:00') },
		{ flagId: f2.id, actorId: pharmacist.id, kind: 'claimed', fromState: 'new', toState: 'in_review', at: t('2026-01-07T09:00') },
		{ flagId: f2.id, actorId: pharmacist.id, kind: 'note', at: t('2026-01-07T09:10') }
	]);

	const rec = (flagId: string, createdAt: string, status: 'sent' | 'accepted' | 'modified' | 'declined' | 'withdrawn') => ({
		flagId,
		pharmacistId: pharmacist.id,
		physicianId: physician.id,
		status,
		message: 'fixture',
		current: {},
		proposed: {},
		keyNumbers: {},
		tokenHash: u('token'),
		tokenExpiresAt: t('2026-02-01T00:00'),
		respondedAt: status === 'sent' || status === 'withdrawn' ? null : t(createdAt),
		createdAt: t(createdAt)
	});
	await db.insert(recommendations).values([
		rec(f1.id, '2026-01-05T10:00', 'accepted'), // R1
		rec(f2.id, '2026-01-07T09:30', 'modified'), // R2
		rec(f4.id, '2026-01-06T02:00', 'declined'), // R3
		rec(f3.id, '2026-01-08T00:00', 'withdrawn'), // R4
		rec(f6.id, '2026-01-05T01:00', 'sent'), // R5
		rec(f5.id, '2026-01-10T09:00', 'sent'), // R6
		rec(f1.id, '2026-01-12T10:00', 'accepted'), // R7: after the range
		rec(f7.id, '2026-01-10T12:00', 'withdrawn') // R8: one recommendation listing F7's findings, withdrawn when the order stopped
	]);

	return { agents: { vanc, gent, pip, ctx, mero } };
}
