import { and, asc, desc, eq, ilike, sql, type SQL } from 'drizzle-orm';
import { getDb, type DbOrTx } from '../db';
import { auditLog } from '../db/schema';
import { auditQuerySchema } from '../../validation/audit';
import { COUNT_CAP, EXPORT_BATCH, logReader, likeEscape, PAGE_SIZE, periodConditions, type LogPage, type SelectRows } from './log-reading';

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

export type AuditPage = LogPage<AuditRow>;

export const FILTER_KEYS = ['actor', 'action', 'objectType', 'objectId', 'from', 'to'] as const;
export { COUNT_CAP, EXPORT_BATCH, PAGE_SIZE };

function conditions(filter: AuditFilter, timeZone: string): SQL[] {
	const where: SQL[] = [];
	if (filter.actor) where.push(ilike(auditLog.actorLabel, `%${likeEscape(filter.actor)}%`));
	if (filter.action) where.push(eq(auditLog.action, filter.action));
	if (filter.objectType) where.push(eq(auditLog.objectType, filter.objectType));
	if (filter.objectId) where.push(eq(auditLog.objectId, filter.objectId));
	return [...where, ...periodConditions(auditLog.at, filter, timeZone)];
}

const selectRows =
	(db: DbOrTx): SelectRows<AuditRow> =>
	(where, order, limit) =>
		db
			.select()
			.from(auditLog)
			.where(and(...where))
			.orderBy(order === 'asc' ? asc(auditLog.id) : desc(auditLog.id))
			.limit(limit);

export const { parseQuery, filterOf, search, exportRows } = logReader({
	table: auditLog,
	id: auditLog.id,
	selectFrom: selectRows,
	conditions,
	filterKeys: FILTER_KEYS,
	schema: auditQuerySchema
});

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
