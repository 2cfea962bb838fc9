import { and, asc, desc, eq, getTableColumns, ilike, inArray, ne, sql, type SQL } from 'drizzle-orm';
import { z } from 'zod';
import { getDb, type DbOrTx } from '../db';
import { causeCodes } from '../db/errors';
import { accessLog, patients } from '../db/schema';
import { logger } from '../logger';
import { accessQuerySchema, ACCESS_OUTCOMES, type AccessKind } from '../../validation/access-log';
import { COUNT_CAP, EXPORT_BATCH, logReader, likeEscape, PAGE_SIZE, periodConditions, type LogPage, type SelectRows } from './log-reading';

/**
 * The access log: who read patient data (a patient, a flag, an answer link) and who the role guard
 * refused, apart from the change audit. Rows are only ever inserted; the database refuses UPDATE and
 * deletes nothing younger than 400 days (migration 0012).
 */

type Reader = { user: { id: string; email: string; role: string } | null; requestId?: string | null };

export type ReadEntry = {
	kind: Exclude<AccessKind, 'denied'>;
	/** the id of what was read: patient, flag or recommendation */
	objectId: string;
	/** the patient whose data was read */
	patientId?: string | null;
	/** when the caller holds only a flag id: the patient is looked up from the flag in the same statement */
	patientOfFlag?: string;
	/** the SvelteKit route id ('/patients/[id]'), never the path: an answer link's path is its secret */
	route: string;
	/** 200 for a read; 404 when a physician asked for a patient who is not theirs */
	status?: number;
};

function actorOf(locals: Reader, kind: AccessKind) {
	if (locals.user) return { actorId: locals.user.id, actorLabel: locals.user.email, role: locals.user.role };
	// the holder of an answer link has no account: the link is who they are
	return { actorId: null, actorLabel: kind === 'answer_link' ? 'answer link' : 'anonymous', role: null };
}

/**
 * One row for one read. Awaited by the reading route before it answers, so a read that could not be
 * put on record fails instead of going unrecorded.
 */
export async function recordRead(locals: Reader, entry: ReadEntry, db: DbOrTx = getDb()): Promise<void> {
	const patientId =
		entry.patientId !== undefined ? entry.patientId : entry.patientOfFlag ? sql`(select patient_id from flags where id = ${entry.patientOfFlag}::uuid)` : null;
	await db.insert(accessLog).values({
		...actorOf(locals, entry.kind),
		kind: entry.kind,
		objectId: entry.objectId,
		patientId,
		route: entry.route,
		status: entry.status ?? 200,
		requestId: locals.requestId ?? null
	});
}

const pending = new Set<Promise<void>>();

/**
 * A refusal by the role guard (403). The guard is synchronous and called from some thirty loads,
 * actions and handlers, so the row is written without waiting: the refusal itself must not wait on,
 * or fail with, the database. A write that fails is logged with the request id (never swallowed).
 */
export function recordRefusal(locals: Reader, route: string): void {
	const write = Promise.resolve()
		.then(() =>
			getDb()
				.insert(accessLog)
				.values({ ...actorOf(locals, 'denied'), kind: 'denied', objectId: null, patientId: null, route, status: 403, requestId: locals.requestId ?? null })
		)
		.then(
			() => undefined,
			(err: unknown) => {
				// codes only: a failed query's message carries its parameters
				logger.error('access log: refusal not recorded', {
					requestId: locals.requestId ?? null,
					route,
					causes: causeCodes(err).join(' < ') || (err instanceof Error ? err.name : 'unknown')
				});
			}
		)
		.finally(() => pending.delete(write));
	pending.add(write);
}

/** Resolves when every refusal written so far has reached the database (tests; an orderly stop). */
export async function settled(): Promise<void> {
	while (pending.size > 0) await Promise.all([...pending]);
}

// ——— reading the log ———

export type AccessFilter = {
	/** part of the actor's label (e-mail, "answer link", "anonymous"), any case */
	actor?: string;
	kind?: AccessKind;
	/** an MRN or a patient id */
	patient?: string;
	outcome?: (typeof ACCESS_OUTCOMES)[number];
	/** local date (YYYY-MM-DD) or date-time (YYYY-MM-DDTHH:MM) in the hospital's zone; inclusive */
	from?: string;
	/** as `from`; a date includes its whole day, a date-time its whole minute */
	to?: string;
};

export type AccessRow = typeof accessLog.$inferSelect & { patientMrn: string | null };

export type AccessPage = LogPage<AccessRow>;

export const FILTER_KEYS = ['actor', 'kind', 'patient', 'outcome', 'from', 'to'] as const;
export { COUNT_CAP, EXPORT_BATCH, PAGE_SIZE };

const isUuid = (text: string) => z.uuid().safeParse(text).success;

function conditions(filter: AccessFilter, timeZone: string): SQL[] {
	const where: SQL[] = [];
	if (filter.actor) where.push(ilike(accessLog.actorLabel, `%${likeEscape(filter.actor)}%`));
	if (filter.kind) where.push(eq(accessLog.kind, filter.kind));
	if (filter.patient) {
		const p = filter.patient;
		// MRNs are stored as the feed sent them (upper case in practice); a typed one may be lower case
		where.push(
			isUuid(p)
				? eq(accessLog.patientId, p.toLowerCase())
				: inArray(accessLog.patientId, sql`(select ${patients.id} from ${patients} where ${patients.mrn} in (${p}, ${p.toUpperCase()}))`)
		);
	}
	if (filter.outcome === 'read') where.push(eq(accessLog.status, 200));
	if (filter.outcome === 'refused') where.push(ne(accessLog.status, 200));
	return [...where, ...periodConditions(accessLog.at, filter, timeZone)];
}

const selectRows =
	(db: DbOrTx): SelectRows<AccessRow> =>
	(where, order, limit) =>
		db
			.select({ ...getTableColumns(accessLog), patientMrn: patients.mrn })
			.from(accessLog)
			.leftJoin(patients, eq(patients.id, accessLog.patientId))
			.where(and(...where))
			.orderBy(order === 'asc' ? asc(accessLog.id) : desc(accessLog.id))
			.limit(limit);

export const { parseQuery, filterOf, search, exportRows } = logReader({
	table: accessLog,
	id: accessLog.id,
	selectFrom: selectRows,
	conditions,
	filterKeys: FILTER_KEYS,
	schema: accessQuerySchema
});

export const EXPORT_COLUMNS = [
	'id',
	'at (UTC)',
	'actor',
	'actor id',
	'role',
	'kind',
	'object id',
	'patient MRN',
	'patient id',
	'route',
	'status',
	'request id'
];

export function exportCells(row: AccessRow): (string | number | null)[] {
	return [
		row.id,
		row.at.toISOString(),
		row.actorLabel,
		row.actorId,
		row.role,
		row.kind,
		row.objectId,
		row.patientMrn,
		row.patientId,
		row.route,
		row.status,
		row.requestId
	];
}
