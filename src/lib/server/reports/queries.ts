import type { Severity } from '../../domain/vocabulary';
import { dayIn } from '../../format';
import { sql, type SQL } from 'drizzle-orm';
import { config } from '../config';
import { getDb, type DbOrTx } from '../db';
import { ruleTitles } from '../rules';

/**
 * The stewardship report: read-only aggregates over flags, their findings, flag events,
 * recommendations, orders and encounters for a range of calendar days in the hospital's time zone and
 * a set of wards. Every count and percentile is computed in PostgreSQL; this module only reshapes the
 * grouped rows.
 *
 * Two units are counted, never mixed:
 * - a flag is one order needing attention: at most one is open per order, so an order counts once for
 *   each episode from its flag opening to its closing, however many rules held. Interventions
 *   (flags raised, agents flagged), recommendations and time to action are read from flag rows and
 *   never joined to findings, so a flag is never counted once per finding.
 * - a finding is one rule holding for an order: a flag holds one per rule that held. Findings per rule
 *   are read from flag_findings alone.
 *
 * Ward of a flag (and of its recommendations): the ward of the patient's encounter in progress when
 * the flag was opened, or, when no encounter covers that moment, the ward of the order's encounter.
 * Ward of a finding: the same, at the moment the finding was raised.
 * Ward of a dose and of a patient-day: the encounter in progress at that moment.
 */

/** Calendar days are inclusive, as YYYY-MM-DD in the hospital time zone; no wards means all wards. */
export type ReportFilter = { from: string; to: string; wards: string[] };
export type ReportOptions = {
	db?: DbOrTx;
	/** IANA zone for calendar days; defaults to the configured hospital time zone */
	timeZone?: string;
	/** the moment the report is run: doses scheduled later have not been given, stays end here */
	asOf?: Date;
};

/** Flags opened on a day, by the severity of the flag's worst finding. */
export type FlagsPerDayRow = { day: string; severity: Severity; flags: number };
/** Findings raised on a day by one rule; the title is the active rule set's, or the key for a rule no longer in it. */
export type FindingsPerDayRow = { day: string; ruleKey: string; ruleTitle: string; findings: number };
export type RecommendationOutcomes = {
	sent: number;
	accepted: number;
	modified: number;
	declined: number;
	noAnswer: number;
	withdrawn: number;
	/** accepted + modified + declined */
	answered: number;
	/** (accepted + modified) / answered; null when nothing was answered */
	acceptanceOfAnswered: number | null;
	/** (accepted + modified) / sent; null when nothing was sent */
	acceptanceOfSent: number | null;
};
export type DurationStats = {
	measure: 'first_action' | 'closure' | 'closure_by_team';
	/** flags opened in the range that reached this point */
	flags: number;
	/** flags opened in the range that have not reached it yet */
	pending: number;
	medianH: number | null;
	p90H: number | null;
};
export type AgentFlagged = { agentId: string; agentName: string; agentClass: string; flags: number; patients: number; highSeverity: number };
export type AgentUse = { agentId: string; agentName: string; agentClass: string; dot: number; dotPer1000PatientDays: number | null };
export type ClassUse = { agentClass: string; agents: number; dot: number; dotPer1000PatientDays: number | null };
export type AntimicrobialUse = {
	patientDays: number;
	totalDot: number;
	totalDotPer1000PatientDays: number | null;
	byAgent: AgentUse[];
	byClass: ClassUse[];
};
export type StewardshipReport = {
	filter: ReportFilter;
	timeZone: string;
	asOf: string;
	days: string[];
	flagsPerDay: FlagsPerDayRow[];
	flagsRaised: number;
	findingsPerDay: FindingsPerDayRow[];
	findingsRaised: number;
	recommendations: RecommendationOutcomes;
	timeToAction: DurationStats[];
	agentsFlagged: AgentFlagged[];
	antimicrobialUse: AntimicrobialUse;
};

export const MAX_RANGE_DAYS = 366;
export const TOP_AGENTS = 15;

/** Every calendar day from `from` to `to` inclusive (date arithmetic on the date alone, no zone). */
export function daysBetween(from: string, to: string): string[] {
	const days: string[] = [];
	const end = Date.parse(`${to}T00:00:00Z`);
	for (let t = Date.parse(`${from}T00:00:00Z`); t <= end && days.length <= MAX_RANGE_DAYS; t += 86_400_000) {
		days.push(new Date(t).toISOString().slice(0, 10));
	}
	return days;
}

/** Today's date in a time zone, as YYYY-MM-DD. */
export function todayIn(timeZone: string, now = new Date()): string {
	return dayIn(timeZone, now);
}

export function addDays(day: string, n: number): string {
	return new Date(Date.parse(`${day}T00:00:00Z`) + n * 86_400_000).toISOString().slice(0, 10);
}

/** The wards known from encounters, for the filter. */
export async function listWards(db: DbOrTx = getDb()): Promise<string[]> {
	const rows = await db.execute<{ ward: string }>(sql`select distinct ward from encounters order by ward`);
	return [...rows].map((r) => r.ward);
}

/** `byWard`: a ward filter is set, so each flag's and finding's ward must be found. */
type Ctx = { db: DbOrTx; tz: string; start: SQL; end: SQL; asOf: SQL; wardIn: (column: SQL) => SQL; byWard: boolean };

function context(filter: ReportFilter, options: ReportOptions): Ctx {
	const tz = options.timeZone ?? config.hospitalTimeZone;
	const asOf = options.asOf ?? new Date();
	// Midnight of the first day and of the day after the last, in the hospital's zone.
	const start = sql`((${filter.from}::date)::timestamp at time zone ${tz})`;
	const end = sql`((${filter.to}::date + 1)::timestamp at time zone ${tz})`;
	const wards = [...new Set(filter.wards)];
	const wardIn = (column: SQL) =>
		wards.length === 0
			? sql`true`
			: sql`${column} in (${sql.join(
					wards.map((w) => sql`${w}`),
					sql`, `
				)})`;
	return { db: options.db ?? getDb(), tz, start, end, asOf: sql`(${asOf.toISOString()}::timestamptz)`, wardIn, byWard: wards.length > 0 };
}

/**
 * The patient's ward at a moment: the encounter in progress then (the latest admitted, should two
 * overlap), as one row at most, so joining it never multiplies the rows it is joined to.
 */
function wardAt(patientId: SQL, moment: SQL): SQL {
	return sql`left join lateral (
			select e.ward from encounters e
			where e.patient_id = ${patientId} and e.admitted_at <= ${moment}
				and (e.discharged_at is null or e.discharged_at > ${moment})
			order by e.admitted_at desc limit 1
		) present on true`;
}

/** Flags with their ward (see the module comment), as a FROM-able subquery: one row per flag. */
function flagsWithWard(c: Ctx): SQL {
	// all wards: no need to find each flag's ward (one index probe per flag; the scale bench's 12-month report)
	if (!c.byWard) return sql`(select f.*, o.agent_id, null::text as ward from flags f join orders o on o.id = f.order_id)`;
	return sql`(
		select f.*, o.agent_id, coalesce(present.ward, oe.ward) as ward
		from flags f
		join orders o on o.id = f.order_id
		left join encounters oe on oe.id = o.encounter_id
		${wardAt(sql`f.patient_id`, sql`f.opened_at`)}
	)`;
}

/** Findings with their ward (see the module comment), as a FROM-able subquery: one row per finding. */
function findingsWithWard(c: Ctx): SQL {
	if (!c.byWard) return sql`(select ff.*, null::text as ward from flag_findings ff)`;
	return sql`(
		select ff.*, coalesce(present.ward, oe.ward) as ward
		from flag_findings ff
		join flags f on f.id = ff.flag_id
		join orders o on o.id = f.order_id
		left join encounters oe on oe.id = o.encounter_id
		${wardAt(sql`f.patient_id`, sql`ff.raised_at`)}
	)`;
}

/** Flags opened in the range, per day and by severity (the flag's worst finding): one per order episode. */
export async function flagsPerDay(filter: ReportFilter, options: ReportOptions = {}): Promise<FlagsPerDayRow[]> {
	const c = context(filter, options);
	const rows = await c.db.execute<{ day: string; severity: FlagsPerDayRow['severity']; flags: number }>(sql`
		select to_char((fw.opened_at at time zone ${c.tz})::date, 'YYYY-MM-DD') as day, fw.severity::text as severity,
			count(*)::int as flags
		from ${flagsWithWard(c)} fw
		where fw.opened_at >= ${c.start} and fw.opened_at < ${c.end} and ${c.wardIn(sql`fw.ward`)}
		group by 1, 2
		order by 1, 2`);
	return [...rows].map((r) => ({ day: r.day, severity: r.severity, flags: r.flags }));
}

/**
 * Findings raised in the range, per day and by rule: one per rule that held for an order, counted on
 * the day it began to hold (whichever flag it joined, and however often it was restated since).
 */
export async function findingsPerDay(filter: ReportFilter, options: ReportOptions = {}): Promise<FindingsPerDayRow[]> {
	const c = context(filter, options);
	const [rows, title] = await Promise.all([
		c.db.execute<{ day: string; rule_key: string; findings: number }>(sql`
			select to_char((fw.raised_at at time zone ${c.tz})::date, 'YYYY-MM-DD') as day, fw.rule_key, count(*)::int as findings
			from ${findingsWithWard(c)} fw
			where fw.raised_at >= ${c.start} and fw.raised_at < ${c.end} and ${c.wardIn(sql`fw.ward`)}
			group by 1, 2
			order by 1, 2`),
		ruleTitles(c.db)
	]);
	return [...rows].map((r) => ({ day: r.day, ruleKey: r.rule_key, ruleTitle: title(r.rule_key), findings: r.findings }));
}

/** Recommendations sent in the range (by their creation time) and where each stands now. */
export async function recommendationOutcomes(filter: ReportFilter, options: ReportOptions = {}): Promise<RecommendationOutcomes> {
	const c = context(filter, options);
	const [row] = await c.db.execute<Record<'sent' | 'accepted' | 'modified' | 'declined' | 'no_answer' | 'withdrawn', number>>(sql`
		select count(*)::int as sent,
			count(*) filter (where r.status = 'accepted')::int as accepted,
			count(*) filter (where r.status = 'modified')::int as modified,
			count(*) filter (where r.status = 'declined')::int as declined,
			count(*) filter (where r.status = 'sent')::int as no_answer,
			count(*) filter (where r.status = 'withdrawn')::int as withdrawn
		from recommendations r
		join ${flagsWithWard(c)} fw on fw.id = r.flag_id
		where r.created_at >= ${c.start} and r.created_at < ${c.end} and ${c.wardIn(sql`fw.ward`)}`);
	const answered = row.accepted + row.modified + row.declined;
	const taken = row.accepted + row.modified;
	return {
		sent: row.sent,
		accepted: row.accepted,
		modified: row.modified,
		declined: row.declined,
		noAnswer: row.no_answer,
		withdrawn: row.withdrawn,
		answered,
		acceptanceOfAnswered: answered === 0 ? null : taken / answered,
		acceptanceOfSent: row.sent === 0 ? null : taken / row.sent
	};
}

/**
 * Hours from a flag's creation to its first action (firstActionAt, or else the first flag event made
 * by a person rather than the system) and to its closure, over flags opened in the range.
 * Percentiles are PostgreSQL's percentile_cont: linear interpolation between the closest ranks.
 */
export async function timeToAction(filter: ReportFilter, options: ReportOptions = {}): Promise<DurationStats[]> {
	const c = context(filter, options);
	const rows = await c.db.execute<{ measure: DurationStats['measure']; flags: number; pending: number; median_h: number | null; p90_h: number | null }>(sql`
		with scoped as (
			select fw.id, fw.opened_at, fw.closed_at, fw.outcome,
				coalesce(fw.first_action_at,
					(select min(ev.at) from flag_events ev where ev.flag_id = fw.id and ev.actor_id is not null)) as first_action_at
			from ${flagsWithWard(c)} fw
			where fw.opened_at >= ${c.start} and fw.opened_at < ${c.end} and ${c.wardIn(sql`fw.ward`)}
		),
		measured as (
			select 'first_action' as measure, 1 as ord, extract(epoch from (first_action_at - opened_at)) / 3600 as hours from scoped
			union all
			select 'closure', 2, extract(epoch from (closed_at - opened_at)) / 3600 from scoped
			union all
			select 'closure_by_team', 3, extract(epoch from (closed_at - opened_at)) / 3600 from scoped
				where outcome is distinct from 'superseded'
		)
		select measure, count(hours)::int as flags, (count(*) - count(hours))::int as pending,
			(percentile_cont(0.5) within group (order by hours))::float8 as median_h,
			(percentile_cont(0.9) within group (order by hours))::float8 as p90_h
		from measured group by measure, ord order by ord`);
	const found = new Map([...rows].map((r) => [r.measure, r]));
	return (['first_action', 'closure', 'closure_by_team'] as const).map((measure) => {
		const r = found.get(measure);
		return { measure, flags: r?.flags ?? 0, pending: r?.pending ?? 0, medianH: r?.median_h ?? null, p90H: r?.p90_h ?? null };
	});
}

export async function agentsFlagged(filter: ReportFilter, options: ReportOptions = {}, limit = TOP_AGENTS): Promise<AgentFlagged[]> {
	const c = context(filter, options);
	const rows = await c.db.execute<{ agent_id: string; agent_name: string; agent_class: string; flags: number; patients: number; high: number }>(sql`
		select a.id as agent_id, a.name as agent_name, a.agent_class, count(*)::int as flags,
			count(distinct fw.patient_id)::int as patients, count(*) filter (where fw.severity = 'high')::int as high
		from ${flagsWithWard(c)} fw
		join agents a on a.id = fw.agent_id
		where fw.opened_at >= ${c.start} and fw.opened_at < ${c.end} and ${c.wardIn(sql`fw.ward`)}
		group by a.id, a.name, a.agent_class
		order by flags desc, a.name
		limit ${limit}`);
	return [...rows].map((r) => ({
		agentId: r.agent_id,
		agentName: r.agent_name,
		agentClass: r.agent_class,
		flags: r.flags,
		patients: r.patients,
		highSeverity: r.high
	}));
}

/**
 * Days of therapy per 1,000 patient-days, after CDC NHSN Patient Safety Component Manual,
 * Antimicrobial Use and Resistance (AUR) Module, Antimicrobial Use option:
 * - numerator: one antimicrobial day (DOT) per patient, per agent, per calendar day on which at least
 *   one dose of that agent was given, whatever the number of doses; two agents on the same day count
 *   two; a day without a dose counts none. Doses are the order's schedule: startAt + k × intervalH,
 *   before stoppedAt (a dose due exactly at the stop is not given) and before the report is run, and
 *   only while the patient is in hospital (an encounter in progress), in a selected ward.
 * - denominator: patient-days counted as NHSN "days present": each calendar day on which a patient is
 *   in a selected ward for any part of the day counts one, once per patient however many wards.
 * - class totals add the agents' DOT, as NHSN groups do.
 * Calendar days are the hospital time zone's.
 */
export async function antimicrobialUse(filter: ReportFilter, options: ReportOptions = {}): Promise<AntimicrobialUse> {
	const c = context(filter, options);
	// the denominator and the numerator side by side (over a 1,000-bed year each takes about half a second)
	const [[days], agentRows] = await Promise.all([
		c.db.execute<{ patient_days: number }>(sql`
		with stays as (
			select e.patient_id,
				greatest(e.admitted_at, ${c.start}) as s,
				least(coalesce(e.discharged_at, 'infinity'::timestamptz), ${c.end}, ${c.asOf}) as t
			from encounters e
			where e.admitted_at < ${c.end} and (e.discharged_at is null or e.discharged_at > ${c.start}) and ${c.wardIn(sql`e.ward`)}
		)
		select count(*)::int as patient_days from (
			select distinct st.patient_id, d::date as day
			from stays st,
				generate_series((st.s at time zone ${c.tz})::date, ((st.t - interval '1 microsecond') at time zone ${c.tz})::date, interval '1 day') d
			where st.t > st.s
		) present`),
		c.db.execute<{ agent_id: string; agent_name: string; agent_class: string; dot: number }>(sql`
		with windows as (
			select o.patient_id, o.agent_id, o.start_at, o.interval_h * 3600 as interval_s,
				greatest(o.start_at, ${c.start}) as w_start,
				least(coalesce(o.stopped_at, 'infinity'::timestamptz), ${c.end}, ${c.asOf}) as w_end
			from orders o
			where o.start_at < ${c.end} and (o.stopped_at is null or o.stopped_at > ${c.start})
		),
		doses as (
			-- only the scheduled doses inside the window: k from the first at or after w_start to the last before w_end
			select w.patient_id, w.agent_id, w.start_at + make_interval(secs => k * w.interval_s) as dose_at
			from windows w,
				generate_series(
					ceil(extract(epoch from (w.w_start - w.start_at)) / w.interval_s)::bigint,
					(ceil(extract(epoch from (w.w_end - w.start_at)) / w.interval_s) - 1)::bigint
				) k
			where w.w_end > w.w_start
		),
		agent_days as (
			select distinct d.patient_id, d.agent_id, (d.dose_at at time zone ${c.tz})::date as day
			from doses d
			join encounters e on e.patient_id = d.patient_id and e.admitted_at <= d.dose_at
				and (e.discharged_at is null or e.discharged_at > d.dose_at)
			where d.dose_at >= ${c.start} and d.dose_at < ${c.end} and ${c.wardIn(sql`e.ward`)}
		)
		select a.id as agent_id, a.name as agent_name, a.agent_class, count(*)::int as dot
		from agent_days ad join agents a on a.id = ad.agent_id
		group by a.id, a.name, a.agent_class
		order by dot desc, a.name`)
	]);
	const patientDays = days.patient_days;
	const per1000 = (dot: number) => (patientDays === 0 ? null : (dot / patientDays) * 1000);
	const byAgent = [...agentRows].map((r) => ({
		agentId: r.agent_id,
		agentName: r.agent_name,
		agentClass: r.agent_class,
		dot: r.dot,
		dotPer1000PatientDays: per1000(r.dot)
	}));
	const classes = new Map<string, { agents: number; dot: number }>();
	for (const a of byAgent) {
		const k = classes.get(a.agentClass) ?? { agents: 0, dot: 0 };
		classes.set(a.agentClass, { agents: k.agents + 1, dot: k.dot + a.dot });
	}
	const byClass = [...classes]
		.map(([agentClass, v]) => ({ agentClass, agents: v.agents, dot: v.dot, dotPer1000PatientDays: per1000(v.dot) }))
		.sort((a, b) => b.dot - a.dot || a.agentClass.localeCompare(b.agentClass));
	const totalDot = byAgent.reduce((sum, a) => sum + a.dot, 0);
	return { patientDays, totalDot, totalDotPer1000PatientDays: per1000(totalDot), byAgent, byClass };
}

export const PARTS = ['flagsPerDay', 'findingsPerDay', 'recommendations', 'timeToAction', 'agentsFlagged', 'antimicrobialUse'] as const;
export type Part = (typeof PARTS)[number];

const NO_RECOMMENDATIONS: RecommendationOutcomes = {
	sent: 0,
	accepted: 0,
	modified: 0,
	declined: 0,
	noAnswer: 0,
	withdrawn: 0,
	answered: 0,
	acceptanceOfAnswered: null,
	acceptanceOfSent: null
};
const NO_USE: AntimicrobialUse = { patientDays: 0, totalDot: 0, totalDotPer1000PatientDays: null, byAgent: [], byClass: [] };

/**
 * The whole report; the parts are independent reads, run side by side. `parts` limits the work to
 * what a caller needs (a CSV of one table); the parts left out come back empty.
 */
export async function build(filter: ReportFilter, options: ReportOptions & { parts?: readonly Part[] } = {}): Promise<StewardshipReport> {
	const asOf = options.asOf ?? new Date();
	const opts = { ...options, asOf };
	const want = new Set(options.parts ?? PARTS);
	const [perDay, findings, recommendations, durations, agents, use] = await Promise.all([
		want.has('flagsPerDay') ? flagsPerDay(filter, opts) : [],
		want.has('findingsPerDay') ? findingsPerDay(filter, opts) : [],
		want.has('recommendations') ? recommendationOutcomes(filter, opts) : NO_RECOMMENDATIONS,
		want.has('timeToAction') ? timeToAction(filter, opts) : [],
		want.has('agentsFlagged') ? agentsFlagged(filter, opts) : [],
		want.has('antimicrobialUse') ? antimicrobialUse(filter, opts) : NO_USE
	]);
	return {
		filter,
		timeZone: options.timeZone ?? config.hospitalTimeZone,
		asOf: asOf.toISOString(),
		days: daysBetween(filter.from, filter.to),
		flagsPerDay: perDay,
		flagsRaised: perDay.reduce((sum, r) => sum + r.flags, 0),
		findingsPerDay: findings,
		findingsRaised: findings.reduce((sum, r) => sum + r.findings, 0),
		recommendations,
		timeToAction: durations,
		agentsFlagged: agents,
		antimicrobialUse: use
	};
}

/** True when nothing at all happened in the range and wards: the page shows its empty state. */
export function isEmpty(report: StewardshipReport): boolean {
	return (
		report.flagsRaised === 0 &&
		report.findingsRaised === 0 &&
		report.recommendations.sent === 0 &&
		report.antimicrobialUse.totalDot === 0 &&
		report.antimicrobialUse.patientDays === 0
	);
}
