// One inbound message → one transaction: the raw message (its content hash makes re-sending
// harmless), the patients, encounters, orders, doses given, results and drug levels it carries (set-based upserts that
// recognise an unchanged resource), quarantine rows for what failed, and one order.reassess job per
// affected order, enqueued in the same transaction.
import type { Actor } from '../../domain/actor';
import { and, eq, inArray } from 'drizzle-orm';
import * as audit from '../audit';
import { getDb, type Database, type Tx } from '../db';
import { feedMessages, orders, quarantine } from '../db/schema';
import { enqueueReassess } from '../reassess';
import type { CsvKind, CsvRow } from './csv';
import type { BundleEnvelope } from './fhir';
import type {
	AdministrationRecord,
	EncounterRecord,
	EntryOutcome,
	FeedSource,
	IngestSummary,
	IntakeRecord,
	LevelRecord,
	OrderRecord,
	Rejection,
	PatientRef,
	RenalReplacementRecord,
	ResultRecord
} from './types';
import { loadAgentIndex, prepareBundle, prepareCsv, type Prepared } from './prepare';
import { upsertEncounters, upsertPatients, resolvePatients } from './store-patients';
import { saveRoles, savePractitioners } from './store-prescribers';
import { applyStops, upsertOrders } from './store-orders';
import { applyRetractions, upsertRenalReplacement, upsertResults } from './store-results';
import { upsertAdministrations, upsertLevels } from './store-levels';

export type { Actor };

/**
 * commit: store what is valid, quarantine the rest. all-or-nothing: store nothing when anything is
 * rejected. dry-run: run every check against the database, then store nothing (CSV preview).
 */
export type IngestMode = 'commit' | 'all-or-nothing' | 'dry-run';

export type IngestContext = {
	source: FeedSource;
	actor: Actor;
	tokenId?: string | null;
	uploadedBy?: string | null;
	now?: Date;
	mode?: IngestMode;
	db?: Database;
	/** false when the caller assesses the affected orders itself (the demo seed) */
	enqueue?: boolean;
};

export type IngestResult = IngestSummary & {
	stored: boolean;
	rejections: Rejection[];
	/** with `enqueue: false`: the orders the caller must re-assess itself */
	ordersToAssess?: string[];
};

const TYPE_OF: Record<IntakeRecord['kind'], string> = {
	patient: 'Patient',
	encounter: 'Encounter',
	order: 'MedicationRequest',
	stop: 'MedicationRequest',
	result: 'Observation',
	retract: 'Observation',
	level: 'Observation',
	administration: 'MedicationAdministration',
	'renal-replacement': 'Procedure',
	practitioner: 'Practitioner',
	'practitioner-role': 'PractitionerRole'
};

export class Rollback extends Error {
	constructor(readonly result: IngestResult) {
		super('rolled back');
	}
}

/** unique violation, deadlock, serialisation failure */
function isRetryable(error: unknown): boolean {
	const e = error as { code?: string; cause?: { code?: string } };
	const code = e?.code ?? e?.cause?.code;
	return code === '23505' || code === '40P01' || code === '40001';
}

/** Ingests a FHIR Bundle that has passed the envelope check; `rawText` is stored as received. */
export async function ingestBundle(rawText: string, bundle: BundleEnvelope, ctx: IngestContext): Promise<IngestResult> {
	const now = ctx.now ?? new Date();
	const prepared = prepareBundle(rawText, bundle, await loadAgentIndex(ctx.db), now);
	return ingestPrepared(prepared, { ...ctx, now });
}

/** Ingests rows of a CSV file (one chunk of an upload); `header` as in the file. */
export async function ingestCsvRows(kind: CsvKind, header: string[], rows: CsvRow[], ctx: IngestContext): Promise<IngestResult> {
	const now = ctx.now ?? new Date();
	const prepared = prepareCsv(kind, header, rows, await loadAgentIndex(ctx.db), now);
	return ingestPrepared(prepared, { ...ctx, now });
}

async function ingestPrepared(prepared: Prepared, ctx: IngestContext & { now: Date }): Promise<IngestResult> {
	const db = ctx.db ?? getDb();
	for (let attempt = 1; ; attempt++) {
		try {
			return await db.transaction((tx) => applyIntake(tx, prepared, ctx));
		} catch (error) {
			if (error instanceof Rollback) return error.result;
			// a concurrent message created the same row first, or two messages crossed: once more sees their rows
			if (attempt < 3 && isRetryable(error)) continue;
			throw error;
		}
	}
}

/** Everything for one message inside one transaction. Exported for quarantine re-processing. */
export async function applyIntake(tx: Tx, prepared: Prepared, ctx: IngestContext & { now: Date }): Promise<IngestResult> {
	const mode = ctx.mode ?? 'commit';
	const outcomes = new Map<number, EntryOutcome>();
	const rejections: Rejection[] = [...prepared.rejections];
	const receivedAt = ctx.now.toISOString();

	// ── The raw message, once ────────────────────────────────────────────────────────────────────
	const [message] = await tx
		.insert(feedMessages)
		.values({
			source: ctx.source,
			contentHash: prepared.hash,
			tokenId: ctx.tokenId ?? null,
			uploadedBy: ctx.uploadedBy ?? null,
			raw: prepared.raw,
			entryCount: prepared.entryCount,
			receivedAt: ctx.now
		})
		.onConflictDoNothing({ target: feedMessages.contentHash })
		.returning({ id: feedMessages.id, receivedAt: feedMessages.receivedAt });
	if (!message) {
		const [original] = await tx
			.select({ id: feedMessages.id, receivedAt: feedMessages.receivedAt })
			.from(feedMessages)
			.where(eq(feedMessages.contentHash, prepared.hash));
		const when = original?.receivedAt.toISOString() ?? 'earlier';
		const indexes = new Set<number>([...prepared.records.map((r) => r.index), ...prepared.rejections.map((r) => r.index)]);
		const entries = [...indexes]
			.sort((a, b) => a - b)
			.map((index) => ({
				index,
				...prepared.describe(index),
				outcome: 'duplicate' as const,
				reason: `duplicate message: the same content was received at ${when} (message ${original?.id ?? 'unknown'}); nothing changed`
			}));
		return {
			messageId: original?.id ?? null,
			duplicateMessage: true,
			receivedAt,
			counts: { accepted: 0, duplicate: entries.length, quarantined: 0 },
			ordersQueued: 0,
			entries,
			stored: false,
			rejections: []
		};
	}

	const setOutcome = (record: IntakeRecord, outcome: 'accepted' | 'duplicate', detail?: EntryOutcome['detail'], notes: string[] = []) => {
		if (!record.primary) return;
		const d = prepared.describe(record.index);
		outcomes.set(record.index, {
			index: record.index,
			resourceType: d.resourceType ?? (prepared.csv ? null : TYPE_OF[record.kind]),
			id: d.id ?? ('sourceId' in record ? record.sourceId : null),
			outcome,
			...(detail ? { detail } : {}),
			...(notes.length ? { notes } : {})
		});
	};
	const reject = (record: IntakeRecord, field: string, reason: string) => {
		rejections.push({
			index: record.index,
			resourceType: prepared.csv ? null : TYPE_OF[record.kind],
			sourceId: 'sourceId' in record ? record.sourceId : null,
			field,
			reason
		});
	};

	const byKind = <K extends IntakeRecord['kind']>(kind: K) => prepared.records.filter((r): r is Extract<IntakeRecord, { kind: K }> => r.kind === kind);
	const affectedPatients = new Set<string>();
	const affectedOrders = new Set<string>();

	// ── Patients ─────────────────────────────────────────────────────────────────────────────────
	await upsertPatients(tx, byKind('patient'), { setOutcome, reject, affectedPatients });

	// ── The prescriber directory, before the orders that name prescribers ─────────────────────────
	const prescriberOfEntry = await savePractitioners(tx, byKind('practitioner'), { setOutcome, reject });
	await saveRoles(tx, byKind('practitioner-role'), prescriberOfEntry, { setOutcome, reject });

	// ── Resolve every other record's patient ──────────────────────────────────────────────────────
	const others = prepared.records.filter(
		(r): r is EncounterRecord | OrderRecord | ResultRecord | RenalReplacementRecord | LevelRecord | (AdministrationRecord & { patient: PatientRef }) =>
			r.kind === 'encounter' ||
			r.kind === 'order' ||
			r.kind === 'result' ||
			r.kind === 'renal-replacement' ||
			r.kind === 'level' ||
			(r.kind === 'administration' && r.patient !== null)
	);
	const patientIdOf = await resolvePatients(
		tx,
		others.map((r) => r.patient)
	);
	const resolved = new Map<IntakeRecord, string>();
	for (const r of others) {
		const id = patientIdOf(r.patient);
		if (id) resolved.set(r, id);
		else {
			const hint =
				r.patient.field === 'mrn'
					? 'add given_name, family_name, birth_date and sex to the row to create the patient'
					: 'send the Patient resource first or in the same bundle';
			reject(r, r.patient.field, `${r.patient.field}: unknown patient ${r.patient.label}; ${hint}`);
		}
	}
	const ok = <T extends IntakeRecord>(list: T[]) => list.filter((r) => resolved.has(r));

	// ── Encounters, orders, stops ─────────────────────────────────────────────────────────────────
	await upsertEncounters(tx, ok(byKind('encounter')), resolved, setOutcome);
	await upsertOrders(tx, ok(byKind('order')), resolved, { setOutcome, reject, affectedOrders, now: ctx.now, prescriberOfEntry });
	await applyStops(tx, byKind('stop'), { setOutcome, reject, affectedOrders, csv: prepared.csv, now: ctx.now });
	const administrations = byKind('administration').filter((r) => r.markOnly || resolved.has(r));
	await upsertAdministrations(tx, administrations, resolved, message.id, { setOutcome, reject, affectedOrders, csv: prepared.csv, now: ctx.now });

	// ── Results ───────────────────────────────────────────────────────────────────────────────────
	await upsertResults(tx, ok(byKind('result')), resolved, message.id, { setOutcome, reject, affectedPatients, now: ctx.now });
	await upsertLevels(tx, ok(byKind('level')), resolved, message.id, { setOutcome, reject, affectedPatients, now: ctx.now });
	await applyRetractions(tx, byKind('retract'), { setOutcome, reject, affectedPatients });
	await upsertRenalReplacement(tx, ok(byKind('renal-replacement')), resolved, message.id, { setOutcome, reject, affectedPatients });

	// ── Work for the queue, in this transaction ──────────────────────────────────────────────────
	if (affectedPatients.size > 0) {
		const active = await tx
			.select({ id: orders.id })
			.from(orders)
			.where(and(eq(orders.status, 'active'), inArray(orders.patientId, [...affectedPatients])));
		for (const o of active) affectedOrders.add(o.id);
	}
	const ordersQueued = mode === 'dry-run' || ctx.enqueue === false ? affectedOrders.size : await enqueueReassess(tx, affectedOrders);

	// ── Quarantine and the summary ─────────────────────────────────────────────────────────────────
	for (const r of rejections) {
		outcomes.set(r.index, {
			index: r.index,
			resourceType: r.resourceType ?? prepared.describe(r.index).resourceType,
			id: r.sourceId ?? prepared.describe(r.index).id,
			outcome: 'quarantined',
			reason: r.reason,
			field: r.field
		});
	}
	if (rejections.length > 0) {
		await tx.insert(quarantine).values(
			rejections.map((r) => ({
				messageId: message.id,
				source: ctx.source,
				entryIndex: r.index,
				resourceType: r.resourceType,
				reason: r.reason,
				field: r.field,
				raw: prepared.rawOf(r.index)
			}))
		);
	}
	const entries = [...outcomes.values()].sort((a, b) => a.index - b.index);
	const counts = { accepted: 0, duplicate: 0, quarantined: 0 };
	for (const e of entries) counts[e.outcome]++;
	const summary = { counts, ordersQueued };
	await tx.update(feedMessages).set({ summary }).where(eq(feedMessages.id, message.id));
	await audit.record(
		{
			...ctx.actor,
			action: 'feed.message_received',
			objectType: 'feed_message',
			objectId: message.id,
			after: { source: ctx.source, entries: prepared.entryCount, ...counts, ordersQueued },
			at: ctx.now
		},
		tx
	);
	const result: IngestResult = {
		messageId: message.id,
		duplicateMessage: false,
		receivedAt: message.receivedAt.toISOString(),
		counts,
		ordersQueued,
		entries,
		stored: true,
		rejections,
		...(ctx.enqueue === false ? { ordersToAssess: [...affectedOrders] } : {})
	};
	if (mode === 'dry-run' || (mode === 'all-or-nothing' && rejections.length > 0)) {
		throw new Rollback({ ...result, messageId: null, stored: false });
	}
	return result;
}
