// Read side of the triage board: the board page (one SQL query with joins, keyset pagination), one
// flag with its assessment's trace and history, and open-flag counts for the home page.
import { and, asc, eq, sql, type SQL } from 'drizzle-orm';
import { FLAG_STATES, SEVERITIES, severityRank, type Sex } from '../../domain/vocabulary';
import { availableActions, type FlagState } from '../../flags/lifecycle';
import type { BoardFacets, BoardPage, BoardRow, OrderAssessed, FindingSummary, FindingView, FlagEventView, FlagActionKind, Severity } from '../../flags/board';
import { DEFAULT_DIR, type BoardQuery, type BoardSort } from '../../validation/flags';
import { ageOnDate } from '../../clinical/age';
import { PROPOSAL_CAUTION } from '../../clinical/trace';
import type { Assessment, ProposedRegimen, TraceStep } from '../../clinical/types';
import { assessmentTrace } from '../reassess';
import { getDb, type DbOrTx } from '../db';
import { agents, assessments, flagEvents, flagFindings, flags, orders, users } from '../db/schema';
import { ruleTitles } from '../rules';
import { EXAMPLE_PARAMETERS_NOTE, patientSummary } from '../patients';

type SortSpec = { expr: (dir: 'asc' | 'desc') => SQL; cast: SQL };

const NUM = sql.raw('float8');
const TEXT = sql.raw('text');
/** A closed word list (never input) as an SQL text array: ordering by position in it keeps the list's order. */
const listPosition = (list: readonly string[]) => sql.raw(`array[${list.map((word) => `'${word}'`).join(',')}]::text[]`);

/**
 * Sort expressions. Unknown values (no CrCl yet) sort last in either direction, so the key is
 * coalesced to ±Infinity according to the direction; the cursor carries the coalesced value.
 */
const SORTS: Record<BoardSort, SortSpec> = {
	priority: { expr: () => sql`f.priority`, cast: NUM },
	// age ascending = youngest first
	age: { expr: () => sql`(-extract(epoch from f.opened_at))::float8`, cast: NUM },
	patient: { expr: () => sql`lower(p.family_name || ' ' || p.given_name)`, cast: TEXT },
	ward: { expr: () => sql`lower(coalesce(enc.ward, '~') || ' ' || coalesce(enc.bed, ''))`, cast: TEXT },
	agent: { expr: () => sql`lower(ag.name)`, cast: TEXT },
	crcl: { expr: (dir) => sql`coalesce(a.crcl_ml_min, ${sql.raw(dir === 'asc' ? "'Infinity'" : "'-Infinity'")}::float8)`, cast: NUM },
	halfLife: { expr: (dir) => sql`coalesce(a.half_life_h, ${sql.raw(dir === 'asc' ? "'Infinity'" : "'-Infinity'")}::float8)`, cast: NUM },
	state: { expr: () => sql`array_position(${listPosition(FLAG_STATES)}, f.state::text)::float8`, cast: NUM }
};

/**
 * The findings a flag is listed by: the open ones while it is open, the ones that held when it closed
 * once it is closed. The board's rule and severity filters match a flag when any of these match.
 */
const LISTED_FINDING = sql`ff.flag_id = f.id and (ff.resolved_at is null or (f.state = 'closed' and f.outcome <> 'superseded'))`;
/** A superseded flag lists the findings it had (all resolved) so it still reads as what it was. */
const LISTED_FINDING_OF_SUPERSEDED = sql`ff.flag_id = f.id and f.state = 'closed' and f.outcome = 'superseded'`;

/** Flags asleep now: snoozed until the next result, or until a time still ahead. */
const ASLEEP = sql`(f.state = 'snoozed' and (f.snooze_until_next_result or f.snoozed_until > now()))`;

export class BadCursorError extends Error {
	constructor() {
		super('cursor is not one this board gave out; start again from the first page');
	}
}

function encodeCursor(sort: BoardSort, dir: string, value: unknown, id: string) {
	return Buffer.from(JSON.stringify([sort, dir, String(value), id])).toString('base64url');
}

function decodeCursor(cursor: string, sort: BoardSort, dir: string): { value: string; id: string } {
	try {
		const parsed = JSON.parse(Buffer.from(cursor, 'base64url').toString('utf8'));
		if (!Array.isArray(parsed) || parsed.length !== 4) throw new Error();
		const [s, d, value, id] = parsed;
		if (s !== sort || d !== dir || typeof value !== 'string' || typeof id !== 'string' || !/^[0-9a-f-]{36}$/i.test(id)) throw new Error();
		return { value, id };
	} catch {
		throw new BadCursorError();
	}
}

function likePattern(q: string) {
	return `%${q.replace(/[\\%_]/g, (c) => `\\${c}`)}%`;
}

const ENCOUNTER = sql`
	left join lateral (
		select e.ward, e.bed from encounters e
		where e.patient_id = f.patient_id
		order by (e.id = o.encounter_id) desc nulls last, (e.discharged_at is null) desc, e.admitted_at desc
		limit 1
	) enc on true`;

/**
 * Only the joins the filters and the sort need, so that finding a page and counting among 10,000
 * flags touches little beyond the flags table (the wide columns are fetched for the page alone).
 */
function leanFrom(query: BoardQuery, sort: BoardSort | null) {
	const patient = Boolean(query.q) || sort === 'patient';
	const agent = Boolean(query.q || query.agent) || sort === 'agent';
	const ward = Boolean(query.ward) || sort === 'ward';
	const assessment = sort === 'crcl' || sort === 'halfLife';
	return sql.join(
		[
			sql`from flags f`,
			patient ? sql`join patients p on p.id = f.patient_id` : sql``,
			agent || ward ? sql`join orders o on o.id = f.order_id` : sql``,
			agent ? sql`join agents ag on ag.id = o.agent_id` : sql``,
			assessment ? sql`join assessments a on a.id = f.assessment_id` : sql``,
			ward ? ENCOUNTER : sql``
		],
		sql` `
	);
}

function filters(query: BoardQuery, userId: string): SQL[] {
	const where: SQL[] = [];
	switch (query.state) {
		case 'open':
			where.push(sql`f.state <> 'closed' and not ${ASLEEP}`);
			break;
		case 'all':
			break;
		default:
			where.push(sql`f.state = ${query.state}`);
	}
	if (query.severity?.length) {
		where.push(sql`exists (select 1 from flag_findings ff where (${LISTED_FINDING} or ${LISTED_FINDING_OF_SUPERSEDED})
			and ff.severity::text in (${sql.join(
				query.severity.map((s) => sql`${s}`),
				sql`, `
			)}))`);
	}
	if (query.ward) where.push(sql`enc.ward = ${query.ward}`);
	if (query.rule)
		where.push(sql`exists (select 1 from flag_findings ff where (${LISTED_FINDING} or ${LISTED_FINDING_OF_SUPERSEDED}) and ff.rule_key = ${query.rule})`);
	if (query.agent) where.push(sql`(ag.code = ${query.agent} or lower(ag.name) = lower(${query.agent}))`);
	if (query.mine) where.push(sql`f.assigned_to = ${userId}`);
	if (query.order) where.push(sql`f.order_id = any(${sql.param(query.order)}::uuid[])`);
	if (query.q) {
		const pattern = likePattern(query.q);
		where.push(sql`(
			(p.given_name || ' ' || p.family_name) ilike ${pattern}
			or (p.family_name || ', ' || p.given_name) ilike ${pattern}
			or p.mrn ilike ${pattern}
			or ag.name ilike ${pattern}
			or f.id in (select ff.flag_id from flag_findings ff where ff.resolved_at is null and (ff.text ilike ${pattern} or ff.rule_key ilike ${pattern}))
		)`);
	}
	return where;
}

const whereClause = (parts: SQL[]) => (parts.length ? sql`where ${sql.join(parts, sql` and `)}` : sql``);

type RawRow = {
	id: string;
	version: number;
	state: FlagState;
	asleep: boolean;
	snoozedUntil: Date | null;
	snoozeUntilNextResult: boolean;
	severity: Severity;
	priority: number;
	ruleKey: string;
	finding: string;
	findings: Omit<FindingSummary, 'ruleTitle'>[];
	escalatedAt: Date | null;
	openedAt: Date;
	assigneeId: string | null;
	assigneeName: string | null;
	patientId: string;
	mrn: string;
	givenName: string;
	familyName: string;
	birthDate: string;
	sex: Sex;
	ward: string | null;
	bed: string | null;
	orderId: string;
	agentName: string;
	agentCode: string;
	doseMg: number;
	intervalH: number;
	infusionH: number;
	route: string;
	assessedAt: Date;
	creatinineAt: string | null;
	albuminAt: string | null;
	crclNowMlMin: number | null;
	crclStartMlMin: number | null;
	weightBasis: string | null;
	albuminGL: number | null;
	halfLifeNowH: number | null;
	halfLifeStartH: number | null;
	sortValue: number | string;
};

const isoOrNull = (v: string | Date | null) => (v === null ? null : new Date(v).toISOString());

/** The times a board row and the `orders` answer give of an assessment `a`. */
const ASSESSMENT_TIMES = sql`a.at as "assessedAt", a.result #>> '{creatinine,latestAt}' as "creatinineAt", a.result #>> '{albumin,latestAt}' as "albuminAt"`;

/**
 * Each named order's newest assessment (an unknown id is left out). Read before the page: the page's
 * snapshot is then at least as new, so an order with no row on the page had no flag as of this
 * assessment or a newer one.
 */
async function ordersAssessed(ids: string[], db: DbOrTx): Promise<OrderAssessed[]> {
	const found = await db.execute<{ id: string; assessedAt: Date | null; creatinineAt: string | null; albuminAt: string | null }>(sql`
		select o.id, ${ASSESSMENT_TIMES}
		from orders o
		left join lateral (select at, result from assessments where order_id = o.id order by at desc, created_at desc limit 1) a on true
		where o.id = any(${sql.param(ids)}::uuid[])
		order by o.id`);
	return [...found].map((r) => ({ id: r.id, assessedAt: isoOrNull(r.assessedAt), creatinineAt: isoOrNull(r.creatinineAt), albuminAt: isoOrNull(r.albuminAt) }));
}

function toRow(r: RawRow, title: (key: string) => string): BoardRow {
	return {
		id: r.id,
		version: r.version,
		state: r.state,
		snoozeEnded: r.state === 'snoozed' && !r.asleep,
		snoozedUntil: r.snoozedUntil ? new Date(r.snoozedUntil).toISOString() : null,
		snoozeUntilNextResult: r.snoozeUntilNextResult,
		severity: r.severity,
		priority: r.priority,
		ruleKey: r.ruleKey,
		ruleTitle: title(r.ruleKey),
		finding: r.finding,
		findings: r.findings.map((f) => ({ ...f, ruleTitle: title(f.ruleKey) })),
		escalatedAt: r.escalatedAt ? new Date(r.escalatedAt).toISOString() : null,
		openedAt: new Date(r.openedAt).toISOString(),
		assignee: r.assigneeId ? { id: r.assigneeId, name: r.assigneeName ?? 'someone' } : null,
		patient: {
			id: r.patientId,
			mrn: r.mrn,
			givenName: r.givenName,
			familyName: r.familyName,
			ageYears: ageOnDate(r.birthDate, new Date()),
			sex: r.sex,
			ward: r.ward,
			bed: r.bed
		},
		order: { id: r.orderId, agentName: r.agentName, agentCode: r.agentCode, doseMg: r.doseMg, intervalH: r.intervalH, infusionH: r.infusionH, route: r.route },
		assessedAt: new Date(r.assessedAt).toISOString(),
		creatinineAt: isoOrNull(r.creatinineAt),
		albuminAt: isoOrNull(r.albuminAt),
		crclStartMlMin: r.crclStartMlMin,
		crclNowMlMin: r.crclNowMlMin,
		weightBasis: r.weightBasis,
		albuminGL: r.albuminGL,
		halfLifeStartH: r.halfLifeStartH,
		halfLifeNowH: r.halfLifeNowH
	};
}

/** Flags matching the filters, opened after `since` (the board's "n new" notice). */
export async function countOpenedAfter(query: BoardQuery, userId: string, since: Date, db: DbOrTx = getDb()) {
	const where = [...filters(query, userId), sql`f.opened_at > ${since.toISOString()}::timestamptz`];
	const [row] = await db.execute<{ n: number }>(sql`select count(*)::int as n ${leanFrom(query, null)} ${whereClause(where)}`);
	return row.n;
}

/** One page of the triage board. Throws BadCursorError for a cursor from another sort. */
export async function listBoard(query: BoardQuery, userId: string, db: DbOrTx = getDb()): Promise<BoardPage> {
	const dir = query.dir ?? DEFAULT_DIR[query.sort];
	const spec = SORTS[query.sort];
	const sortExpr = spec.expr(dir);
	const where = filters(query, userId);
	const pageWhere = [...where];
	if (query.cursor) {
		const { value, id } = decodeCursor(query.cursor, query.sort, dir);
		const op = sql.raw(dir === 'desc' ? '<' : '>');
		pageWhere.push(sql`(${sortExpr}, f.id) ${op} (${value}::${spec.cast}, ${id}::uuid)`);
	}
	const order = sql.raw(dir === 'desc' ? 'desc' : 'asc');
	const asOf = new Date();
	// before the page, never beside it (see ordersAssessed)
	const orderTimes = query.order ? await ordersAssessed(query.order, db) : undefined;
	// Find the page's flags with the lean joins, then fetch the wide columns for those rows alone.
	const pageQuery = db.execute<RawRow>(sql`
		with page as (
			select f.id, ${sortExpr} as sort_value
			${leanFrom(query, query.sort)}
			${whereClause(pageWhere)}
			order by ${sortExpr} ${order}, f.id ${order}
			limit ${query.limit + 1}
		)
		select
			f.id, f.version, f.state, ${ASLEEP} as "asleep", f.snoozed_until as "snoozedUntil",
			f.snooze_until_next_result as "snoozeUntilNextResult", f.severity, f.priority, f.rule_key as "ruleKey",
			f.finding, f.escalated_at as "escalatedAt", f.opened_at as "openedAt", f.assigned_to as "assigneeId", u.display_name as "assigneeName",
			(select coalesce(jsonb_agg(jsonb_build_object('id', ff.id, 'ruleKey', ff.rule_key, 'severity', ff.severity, 'text', ff.text)
				order by array_position(${listPosition(SEVERITIES)}, ff.severity::text), ff.priority desc, ff.raised_at), '[]'::jsonb)
				from flag_findings ff where ${LISTED_FINDING} or ${LISTED_FINDING_OF_SUPERSEDED}) as findings,
			p.id as "patientId", p.mrn, p.given_name as "givenName", p.family_name as "familyName",
			p.birth_date::text as "birthDate", p.sex, enc.ward, enc.bed,
			o.id as "orderId", ag.name as "agentName", ag.code as "agentCode", o.dose_mg as "doseMg",
			o.interval_h as "intervalH", o.infusion_h as "infusionH", o.route,
			${ASSESSMENT_TIMES}, a.crcl_ml_min as "crclNowMlMin",
			(a.result #>> '{renal,crclAtStartMlMin}')::float8 as "crclStartMlMin",
			a.result #>> '{covariates,weightBasis}' as "weightBasis",
			a.albumin_gl as "albuminGL", a.half_life_h as "halfLifeNowH",
			(a.result #>> '{kinetics,atStart,halfLifeH}')::float8 as "halfLifeStartH",
			page.sort_value as "sortValue"
		from page
		join flags f on f.id = page.id
		join patients p on p.id = f.patient_id
		join orders o on o.id = f.order_id
		join agents ag on ag.id = o.agent_id
		join assessments a on a.id = f.assessment_id
		left join users u on u.id = f.assigned_to
		${ENCOUNTER}
		order by page.sort_value ${order}, f.id ${order}`);
	const countQuery = query.cursor
		? Promise.resolve(null)
		: db.execute<{ n: number }>(sql`select count(*)::int as n ${leanFrom(query, null)} ${whereClause(where)}`);
	const [raw, counted, facets, title] = await Promise.all([pageQuery, countQuery, query.facets ? boardFacets(db) : Promise.resolve(undefined), ruleTitles(db)]);
	const rows = [...raw] as RawRow[];
	const more = rows.length > query.limit;
	const page = more ? rows.slice(0, query.limit) : rows;
	const last = page.at(-1);
	return {
		rows: page.map((r) => toRow(r, title)),
		nextCursor: more && last ? encodeCursor(query.sort, dir, last.sortValue, last.id) : null,
		total: counted ? counted[0].n : -1,
		asOf: asOf.toISOString(),
		...(facets ? { facets } : {}),
		...(orderTimes ? { orders: orderTimes } : {})
	};
}

/** The choices for the board's filters: wards, rules and agents that have open flags. */
export async function boardFacets(db: DbOrTx = getDb()): Promise<BoardFacets> {
	const [wards, rules, agentRows] = await Promise.all([
		db.execute<{ ward: string }>(
			sql`select distinct enc.ward from flags f join orders o on o.id = f.order_id ${ENCOUNTER} where f.state <> 'closed' and enc.ward is not null order by enc.ward`
		),
		db.execute<{ rule: string }>(
			sql`select distinct ff.rule_key as rule from flags f join flag_findings ff on ff.flag_id = f.id where f.state <> 'closed' and ff.resolved_at is null`
		),
		db.execute<{ code: string; name: string }>(
			sql`select distinct ag.code, ag.name from flags f join orders o on o.id = f.order_id join agents ag on ag.id = o.agent_id where f.state <> 'closed' order by ag.name`
		)
	]);
	const title = await ruleTitles(db);
	return {
		wards: wards.map((w) => w.ward),
		rules: rules.map((r) => ({ key: r.rule, title: title(r.rule) })).sort((a, b) => a.title.localeCompare(b.title)),
		agents: agentRows.map((a) => ({ code: a.code, name: a.name }))
	};
}

/** Open flags by severity (asleep ones apart), for the pharmacist's home page. */
export async function openCounts(db: DbOrTx = getDb()) {
	const rows = await db.execute<{ severity: Severity; awake: number; asleep: number }>(sql`
		select f.severity, count(*) filter (where not ${ASLEEP})::int as awake, count(*) filter (where ${ASLEEP})::int as asleep
		from flags f where f.state <> 'closed' group by f.severity`);
	const counts = { high: 0, moderate: 0, low: 0, snoozed: 0 };
	for (const r of rows) {
		counts[r.severity] = r.awake;
		counts.snoozed += r.asleep;
	}
	return counts;
}

export type FlagDetail = {
	id: string;
	version: number;
	state: FlagState;
	snoozeEnded: boolean;
	snoozedUntil: string | null;
	snoozeUntilNextResult: boolean;
	outcome: string | null;
	severity: Severity;
	priority: number;
	ruleKey: string;
	ruleTitle: string;
	finding: string;
	suggestedAction: string | null;
	/** every finding the flag has held: open ones first (worst first), then resolved ones, newest first */
	findings: FindingView[];
	escalatedAt: string | null;
	facts: unknown;
	openedAt: string;
	closedAt: string | null;
	assignee: { id: string; name: string } | null;
	patient: NonNullable<Awaited<ReturnType<typeof patientSummary>>>;
	order: { id: string; doseMg: number; intervalH: number; infusionH: number; route: string; status: string; startAt: string; prescriberName: string | null };
	agent: { id: string; code: string; name: string; agentClass: string };
	assessment: { id: string; at: string; complete: boolean; result: Omit<Assessment, 'trace'>; trace: TraceStep[]; traceNote: string | null };
	/** the assessment's proposed regimen, with the caution that goes beside it */
	proposed: ProposedRegimen | null;
	caution: string;
	events: FlagEventView[];
	availableActions: FlagActionKind[];
};

/** One flag with everything the detail page shows, or null. */
export async function getFlagDetail(id: string, user: { id: string; role: string }, db: DbOrTx = getDb()): Promise<FlagDetail | null> {
	const [row] = await db
		.select({
			flag: flags,
			order: orders,
			agent: { id: agents.id, code: agents.code, name: agents.name, agentClass: agents.agentClass },
			assessment: assessments,
			assigneeName: users.displayName
		})
		.from(flags)
		.innerJoin(orders, eq(orders.id, flags.orderId))
		.innerJoin(agents, eq(agents.id, orders.agentId))
		.innerJoin(assessments, eq(assessments.id, flags.assessmentId))
		.leftJoin(users, eq(users.id, flags.assignedTo))
		.where(eq(flags.id, id));
	if (!row) return null;
	const [patient, events, asleepRow, findings, title] = await Promise.all([
		patientSummary(row.flag.patientId, db),
		listEvents(id, db),
		db.execute<{ asleep: boolean }>(sql`select ${ASLEEP} as asleep from flags f where f.id = ${id}`),
		listFindings(id, db),
		ruleTitles(db)
	]);
	const f = row.flag;
	const trace = assessmentTrace(row.assessment);
	return {
		id: f.id,
		version: f.version,
		state: f.state,
		snoozeEnded: f.state === 'snoozed' && !asleepRow[0]?.asleep,
		snoozedUntil: f.snoozedUntil?.toISOString() ?? null,
		snoozeUntilNextResult: f.snoozeUntilNextResult,
		outcome: f.outcome,
		severity: f.severity,
		priority: f.priority,
		ruleKey: f.ruleKey,
		ruleTitle: title(f.ruleKey),
		finding: f.finding,
		suggestedAction: f.suggestedAction,
		findings: findings.map((x) => ({ ...x, ruleTitle: title(x.ruleKey) })),
		escalatedAt: f.escalatedAt?.toISOString() ?? null,
		facts: f.facts,
		openedAt: f.openedAt.toISOString(),
		closedAt: f.closedAt?.toISOString() ?? null,
		assignee: f.assignedTo ? { id: f.assignedTo, name: row.assigneeName ?? 'someone' } : null,
		patient: patient!,
		order: {
			id: row.order.id,
			doseMg: row.order.doseMg,
			intervalH: row.order.intervalH,
			infusionH: row.order.infusionH,
			route: row.order.route,
			status: row.order.status,
			startAt: row.order.startAt.toISOString(),
			prescriberName: row.order.prescriberName
		},
		agent: row.agent,
		assessment: {
			id: row.assessment.id,
			at: row.assessment.at.toISOString(),
			complete: row.assessment.complete,
			result: row.assessment.result,
			trace: trace.steps,
			traceNote: trace.note
		},
		proposed: row.assessment.result.dosing.proposed,
		caution: `${PROPOSAL_CAUTION} ${EXAMPLE_PARAMETERS_NOTE}`,
		events,
		availableActions: availableActions(f, user.id, { isAdmin: user.role === 'admin' })
	};
}

/** A flag's findings: open ones worst first, then resolved ones newest first. */
export async function listFindings(flagId: string, db: DbOrTx = getDb()): Promise<Omit<FindingView, 'ruleTitle'>[]> {
	const rows = await db.select().from(flagFindings).where(eq(flagFindings.flagId, flagId));
	return rows
		.sort((a, b) => {
			if ((a.resolvedAt === null) !== (b.resolvedAt === null)) return a.resolvedAt === null ? -1 : 1;
			if (a.resolvedAt && b.resolvedAt) return b.resolvedAt.getTime() - a.resolvedAt.getTime();
			return severityRank(a.severity) - severityRank(b.severity) || b.priority - a.priority;
		})
		.map((r) => ({
			id: r.id,
			ruleKey: r.ruleKey,
			severity: r.severity,
			text: r.text,
			suggestedAction: r.suggestedAction,
			raisedAt: r.raisedAt.toISOString(),
			raisedAssessmentId: r.raisedAssessmentId,
			assessmentId: r.assessmentId,
			resolvedAt: r.resolvedAt?.toISOString() ?? null,
			resolvedAssessmentId: r.resolvedAssessmentId,
			resolvedReason: r.resolvedReason
		}));
}

/** The flag now holding a finding that was once a flag of its own (links and audit rows name old flags). */
export async function flagIdOfFinding(findingId: string, db: DbOrTx = getDb()): Promise<string | null> {
	if (!/^[0-9a-f-]{36}$/i.test(findingId)) return null;
	const [row] = await db.select({ flagId: flagFindings.flagId }).from(flagFindings).where(eq(flagFindings.id, findingId));
	return row && row.flagId !== findingId ? row.flagId : null;
}

export async function listEvents(flagId: string, db: DbOrTx = getDb()): Promise<FlagEventView[]> {
	const rows = await db
		.select({
			id: flagEvents.id,
			kind: flagEvents.kind,
			fromState: flagEvents.fromState,
			toState: flagEvents.toState,
			note: flagEvents.note,
			data: flagEvents.data,
			at: flagEvents.at,
			actor: users.displayName
		})
		.from(flagEvents)
		.leftJoin(users, eq(users.id, flagEvents.actorId))
		.where(eq(flagEvents.flagId, flagId))
		.orderBy(asc(flagEvents.at), asc(flagEvents.id));
	return rows.map((e) => ({ ...e, data: (e.data as Record<string, unknown> | null) ?? null, at: e.at.toISOString() }));
}

/** The flag's version and state after an action, for the API's answer. */
export async function flagStatus(id: string, user: { id: string; role: string }, db: DbOrTx = getDb()) {
	const [f] = await db
		.select({ id: flags.id, version: flags.version, state: flags.state, outcome: flags.outcome, assignedTo: flags.assignedTo, assigneeName: users.displayName })
		.from(flags)
		.leftJoin(users, eq(users.id, flags.assignedTo))
		.where(and(eq(flags.id, id)));
	if (!f) return null;
	return {
		id: f.id,
		version: f.version,
		state: f.state,
		outcome: f.outcome,
		assignee: f.assignedTo ? { id: f.assignedTo, name: f.assigneeName ?? 'someone' } : null,
		availableActions: availableActions(f, user.id, { isAdmin: user.role === 'admin' })
	};
}
