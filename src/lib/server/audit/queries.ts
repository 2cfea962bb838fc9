import { and, asc, desc, eq, gt, gte, ilike, lt, sql, type SQL } from 'drizzle-orm';
import { config } from '../config';
import { getDb, type DbOrTx } from '../db';
import { auditLog } from '../db/schema';
import { fieldErrors, type FieldErrors } from '../http';
import { auditQuerySchema, type AuditQuery } from '../../validation/audit';

/**
 * Reading the audit log: filters, keyset paging (by id, which only grows: the table is append-only)
 * and export in batches. Writing stays in audit.ts.
 */
export type AuditFilter = {
	/** part of the actor's label (e-mail, "feed token …", "system"), any case */
	actor?: string;
	action?: string;
	objectType?: string;
	objectId?: string;
	/** local date (YYYY-MM-DD) or date-time (YYYY-MM-DDTHH:MM) in the hospital's zone; inclusive */
	from?: string;
	/** as `from`; a date includes its whole day, a date-time its whole minute */
	to?: string;
};

export type AuditRow = {
	id: number;
	at: Date;
	actorId: string | null;
	actorLabel: string;
	action: string;
	objectType: string;
	objectId: string | null;
	before: unknown;
	after: unknown;
	requestId: string | null;
};

export type AuditPage = {
	rows: AuditRow[];
	/** pass as `after` to see newer rows; null on the newest page */
	newer: number | null;
	/** pass as `before` to see older rows; null on the oldest page */
	older: number | null;
	/** rows matching the filters, counted up to COUNT_CAP */
	matching: number;
	matchingCapped: boolean;
};

export const FILTER_KEYS = ['actor', 'action', 'objectType', 'objectId', 'from', 'to'] as const;

/** Reads filters and cursor from a URL (the page and the CSV export share it). */
export function parseQuery(params: URLSearchParams): { ok: true; query: AuditQuery } | { ok: false; errors: FieldErrors; values: Record<string, string> } {
	const raw = Object.fromEntries([...FILTER_KEYS, 'before', 'after'].map((k) => [k, params.get(k) ?? undefined]));
	const parsed = auditQuerySchema.safeParse(raw);
	if (parsed.success) return { ok: true, query: parsed.data };
	const values = Object.fromEntries(Object.entries(raw).filter((e): e is [string, string] => typeof e[1] === 'string'));
	return { ok: false, errors: fieldErrors(parsed.error), values };
}

/** The filters alone, without the paging cursor. */
export function filterOf(query: AuditQuery): AuditFilter {
	return Object.fromEntries(FILTER_KEYS.filter((k) => query[k] !== undefined).map((k) => [k, query[k]]));
}

export const PAGE_SIZE = 50;
export const COUNT_CAP = 10_000;
export const EXPORT_BATCH = 1_000;

type Options = { db?: DbOrTx; timeZone?: string };

const likeEscape = (text: string) => text.replace(/[\\%_]/g, (c) => `\\${c}`);

function conditions(filter: AuditFilter, timeZone: string): SQL[] {
	const where: SQL[] = [];
	if (filter.actor) where.push(ilike(auditLog.actorLabel, `%${likeEscape(filter.actor)}%`));
	if (filter.action) where.push(eq(auditLog.action, filter.action));
	if (filter.objectType) where.push(eq(auditLog.objectType, filter.objectType));
	if (filter.objectId) where.push(eq(auditLog.objectId, filter.objectId));
	if (filter.from) where.push(gte(auditLog.at, sql`(${filter.from.replace('T', ' ')}::timestamp at time zone ${timeZone})`));
	if (filter.to) {
		const step = filter.to.length === 10 ? '1 day' : '1 minute';
		where.push(lt(auditLog.at, sql`((${filter.to.replace('T', ' ')}::timestamp + ${step}::interval) at time zone ${timeZone})`));
	}
	return where;
}

/** One page of the log, newest first. `before`/`after` are row ids from a previous page. */
export async function search(filter: AuditFilter, page: { before?: number; after?: number; limit?: number } = {}, options: Options = {}): Promise<AuditPage> {
	const db = options.db ?? getDb();
	const tz = options.timeZone ?? config.hospitalTimeZone;
	const limit = page.limit ?? PAGE_SIZE;
	const base = conditions(filter, tz);

	let rows: AuditRow[];
	let newer: number | null;
	let older: number | null;
	if (page.after !== undefined) {
		// Newer rows: walk upwards from the cursor, then show them newest first.
		const found = await db
			.select()
			.from(auditLog)
			.where(and(...base, gt(auditLog.id, page.after)))
			.orderBy(asc(auditLog.id))
			.limit(limit + 1);
		const more = found.length > limit;
		rows = found.slice(0, limit).reverse();
		newer = more && rows.length > 0 ? rows[0].id : null;
		older = rows.length > 0 ? rows[rows.length - 1].id : page.after + 1;
	} else {
		const where = page.before !== undefined ? [...base, lt(auditLog.id, page.before)] : base;
		const found = await db
			.select()
			.from(auditLog)
			.where(and(...where))
			.orderBy(desc(auditLog.id))
			.limit(limit + 1);
		rows = found.slice(0, limit);
		older = found.length > limit ? rows[rows.length - 1].id : null;
		newer = page.before !== undefined ? (rows.length > 0 ? rows[0].id : page.before - 1) : null;
	}
	const [{ n }] = await db.execute<{ n: number }>(
		sql`select count(*)::int as n from (select 1 from ${auditLog} where ${base.length ? and(...base) : sql`true`} limit ${COUNT_CAP + 1}) capped`
	);
	return { rows, newer, older, matching: Math.min(n, COUNT_CAP), matchingCapped: n > COUNT_CAP };
}

/** Every matching row, newest first, in batches (for CSV export of a log of any size). */
export async function* exportRows(filter: AuditFilter, options: Options & { batch?: number } = {}): AsyncGenerator<AuditRow[]> {
	const db = options.db ?? getDb();
	const tz = options.timeZone ?? config.hospitalTimeZone;
	const batch = options.batch ?? EXPORT_BATCH;
	const base = conditions(filter, tz);
	let before: number | undefined;
	for (;;) {
		const where = before === undefined ? base : [...base, lt(auditLog.id, before)];
		const rows = await db
			.select()
			.from(auditLog)
			.where(and(...where))
			.orderBy(desc(auditLog.id))
			.limit(batch);
		if (rows.length === 0) return;
		yield rows;
		if (rows.length < batch) return;
		before = rows[rows.length - 1].id;
	}
}

/**
 * The distinct values of a low-cardinality column, by a loose index scan (one index probe per value,
 * not a pass over the whole log).
 */
async function distinctValues(column: 'action' | 'object_type', db: DbOrTx): Promise<string[]> {
	const c = sql.identifier(column);
	const rows = await db.execute<{ v: string | null }>(sql`
		with recursive walk(v) as (
			(select ${c} from audit_log order by ${c} limit 1)
			union all
			select (select ${c} from audit_log where ${c} > walk.v order by ${c} limit 1) from walk where walk.v is not null
		)
		select v from walk where v is not null`);
	return [...rows].map((r) => r.v as string);
}

export const listActions = (db: DbOrTx = getDb()) => distinctValues('action', db);
export const listObjectTypes = (db: DbOrTx = getDb()) => distinctValues('object_type', db);

export const EXPORT_COLUMNS = ['id', 'at (UTC)', 'actor', 'actor id', 'action', 'object type', 'object id', 'before', 'after', 'request id'];

/** One CSV row per audit row; before and after as compact JSON. */
export function exportCells(row: AuditRow): (string | number | null)[] {
	return [
		row.id,
		row.at.toISOString(),
		row.actorLabel,
		row.actorId,
		row.action,
		row.objectType,
		row.objectId,
		row.before === null || row.before === undefined ? null : JSON.stringify(row.before),
		row.after === null || row.after === undefined ? null : JSON.stringify(row.after),
		row.requestId
	];
}
