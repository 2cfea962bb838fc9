// What reading the audit log and the access log share: filters and cursor from a URL, the period in the
// hospital's zone, keyset paging by id (ids only grow: both tables are append-only), a capped count and
// export in batches.
import { and, gt, gte, lt, sql, type SQL } from 'drizzle-orm';
import type { PgColumn, PgTable } from 'drizzle-orm/pg-core';
import type { z } from 'zod';
import { config } from '../config';
import { getDb, type DbOrTx } from '../db';
import { fieldErrors, type FieldErrors } from '../../forms';

export const PAGE_SIZE = 50;
export const COUNT_CAP = 10_000;
export const EXPORT_BATCH = 1_000;

export type LogPage<Row> = {
	rows: Row[];
	/** pass as `after` to see newer rows; null on the newest page */
	newer: number | null;
	/** pass as `before` to see older rows; null on the oldest page */
	older: number | null;
	/** rows matching the filters, counted up to COUNT_CAP */
	matching: number;
	matchingCapped: boolean;
};

export type LogOptions = { db?: DbOrTx; timeZone?: string };

/** Reads filters and cursor from a URL (a log's page and its CSV export share it). */
export function parseLogQuery<S extends z.ZodType>(
	params: URLSearchParams,
	filterKeys: readonly string[],
	schema: S
): { ok: true; query: z.infer<S> } | { ok: false; errors: FieldErrors; values: Record<string, string> } {
	const raw = Object.fromEntries([...filterKeys, 'before', 'after'].map((k) => [k, params.get(k) ?? undefined]));
	const parsed = schema.safeParse(raw);
	if (parsed.success) return { ok: true, query: parsed.data as z.infer<S> };
	const values = Object.fromEntries(Object.entries(raw).filter((e): e is [string, string] => typeof e[1] === 'string'));
	return { ok: false, errors: fieldErrors(parsed.error), values };
}

/** The filters alone, without the paging cursor. */
export function filtersOnly<K extends string, F>(keys: readonly K[], query: Partial<Record<K, unknown>>): F {
	return Object.fromEntries(keys.filter((k) => query[k] !== undefined).map((k) => [k, query[k]])) as F;
}

/** `text` matched literally inside an ILIKE pattern. */
export const likeEscape = (text: string) => text.replace(/[\\%_]/g, (c) => `\\${c}`);

/**
 * `from` and `to` as local dates (YYYY-MM-DD) or date-times (YYYY-MM-DDTHH:MM) in the hospital's zone,
 * both inclusive: a date includes its whole day, a date-time its whole minute.
 */
export function periodConditions(at: PgColumn, period: { from?: string; to?: string }, timeZone: string): SQL[] {
	const where: SQL[] = [];
	if (period.from) where.push(gte(at, sql`(${period.from.replace('T', ' ')}::timestamp at time zone ${timeZone})`));
	if (period.to) {
		const step = period.to.length === 10 ? '1 day' : '1 minute';
		where.push(lt(at, sql`((${period.to.replace('T', ' ')}::timestamp + ${step}::interval) at time zone ${timeZone})`));
	}
	return where;
}

/** Reads rows of one log: matching `where`, by id in `order`, at most `limit`. */
export type SelectRows<Row> = (where: SQL[], order: 'asc' | 'desc', limit: number) => Promise<Row[]>;

/** One page, newest first. `before`/`after` are row ids from a previous page. */
export async function keysetPage<Row extends { id: number }>(
	db: DbOrTx,
	table: PgTable,
	id: PgColumn,
	select: SelectRows<Row>,
	base: SQL[],
	page: { before?: number; after?: number; limit?: number }
): Promise<LogPage<Row>> {
	const limit = page.limit ?? PAGE_SIZE;
	let rows: Row[];
	let newer: number | null;
	let older: number | null;
	if (page.after !== undefined) {
		// Newer rows: walk upwards from the cursor, then show them newest first.
		const found = await select([...base, gt(id, page.after)], 'asc', limit + 1);
		const more = found.length > limit;
		rows = found.slice(0, limit).reverse();
		newer = more && rows.length > 0 ? rows[0].id : null;
		older = rows.length > 0 ? rows[rows.length - 1].id : page.after + 1;
	} else {
		const where = page.before !== undefined ? [...base, lt(id, page.before)] : base;
		const found = await select(where, 'desc', limit + 1);
		rows = found.slice(0, limit);
		older = found.length > limit ? rows[rows.length - 1].id : null;
		newer = page.before !== undefined ? (rows.length > 0 ? rows[0].id : page.before - 1) : null;
	}
	const [{ n }] = await db.execute<{ n: number }>(
		sql`select count(*)::int as n from (select 1 from ${table} where ${base.length ? and(...base) : sql`true`} limit ${COUNT_CAP + 1}) capped`
	);
	return { rows, newer, older, matching: Math.min(n, COUNT_CAP), matchingCapped: n > COUNT_CAP };
}

/** Every matching row, newest first, in batches (for CSV export of a log of any size). */
export async function* batchesNewestFirst<Row extends { id: number }>(
	id: PgColumn,
	select: SelectRows<Row>,
	base: SQL[],
	batch = EXPORT_BATCH
): AsyncGenerator<Row[]> {
	let before: number | undefined;
	for (;;) {
		const rows = await select(before === undefined ? base : [...base, lt(id, before)], 'desc', batch);
		if (rows.length === 0) return;
		yield rows;
		if (rows.length < batch) return;
		before = rows[rows.length - 1].id;
	}
}

/**
 * A log's readers from its table, its row query, its filter conditions and its URL filters: `parseQuery`
 * (filters and cursor from a URL; the page and the CSV export share it), `filterOf` (the filters alone,
 * without the paging cursor), `search` (one page, newest first; `before`/`after` are row ids from a
 * previous page) and `exportRows` (every matching row, newest first, in batches, for a CSV export of a
 * log of any size).
 */
export function logReader<Row extends { id: number }, Filter, S extends z.ZodType>(log: {
	table: PgTable;
	id: PgColumn;
	selectFrom: (db: DbOrTx) => SelectRows<Row>;
	conditions: (filter: Filter, timeZone: string) => SQL[];
	filterKeys: readonly string[];
	schema: S;
}) {
	const { table, id, selectFrom, conditions, filterKeys, schema } = log;
	return {
		parseQuery: (params: URLSearchParams) => parseLogQuery(params, filterKeys, schema),
		filterOf: (query: z.infer<S>): Filter => filtersOnly(filterKeys, query as Record<string, unknown>),
		search(filter: Filter, page: { before?: number; after?: number; limit?: number } = {}, options: LogOptions = {}): Promise<LogPage<Row>> {
			const db = options.db ?? getDb();
			return keysetPage(db, table, id, selectFrom(db), conditions(filter, options.timeZone ?? config.hospitalTimeZone), page);
		},
		exportRows(filter: Filter, options: LogOptions & { batch?: number } = {}): AsyncGenerator<Row[]> {
			return batchesNewestFirst(id, selectFrom(options.db ?? getDb()), conditions(filter, options.timeZone ?? config.hospitalTimeZone), options.batch);
		}
	};
}
