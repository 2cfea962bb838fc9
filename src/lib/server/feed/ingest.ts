// One inbound message → one transaction: the raw message (its content hash makes re-sending
// harmless), the patients, encounters, orders and results it carries (set-based upserts that
// recognise an unchanged resource), quarantine rows for what failed, and one order.reassess job per
// affected order, enqueued in the same transaction.
import type { Actor } from '../../domain/actor';
import { createHash } from 'node:crypto';
import { and, eq, inArray, or, sql, type SQL } from 'drizzle-orm';
import * as audit from '../audit/record';
import { prescribers as directory } from '../prescribers';
import { getDb, type Database, type Tx } from '../db';
import { agents, bodyMeasurements, encounters, feedMessages, labResults, orders, patients, quarantine, renalReplacementEvents, users } from '../db/schema';
import { enqueueReassess } from '../reassess';
import { buildAgentIndex, type AgentIndex } from './agent-map';
import { readRow, rowsToCsv, type CsvKind, type CsvRow } from './csv';
import { parseEntries, type BundleEnvelope } from './fhir';
import type {
	EncounterRecord,
	EntryOutcome,
	FeedSource,
	IngestSummary,
	IntakeRecord,
	OrderRecord,
	PatientRecord,
	PatientRef,
	PractitionerRecord,
	PractitionerRoleRecord,
	PrescriberRef,
	Rejection,
	RenalReplacementRecord,
	ResultRecord,
	RetractRecord,
	StopRecord
} from './types';

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

export type IngestResult = IngestSummary & { stored: boolean; rejections: Rejection[] };

const TYPE_OF: Record<IntakeRecord['kind'], string> = {
	patient: 'Patient',
	encounter: 'Encounter',
	order: 'MedicationRequest',
	stop: 'MedicationRequest',
	result: 'Observation',
	retract: 'Observation',
	'renal-replacement': 'Procedure',
	practitioner: 'Practitioner',
	'practitioner-role': 'PractitionerRole'
};

/** Canonical JSON (sorted keys) so the same message with other whitespace or key order hashes the same. */
export function canonicalJson(value: unknown): string {
	if (Array.isArray(value)) return `[${value.map(canonicalJson).join(',')}]`;
	if (value && typeof value === 'object') {
		const entries = Object.entries(value as Record<string, unknown>)
			.filter(([, v]) => v !== undefined)
			.sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0));
		return `{${entries.map(([k, v]) => `${JSON.stringify(k)}:${canonicalJson(v)}`).join(',')}}`;
	}
	return JSON.stringify(value) ?? 'null';
}

export function contentHash(kind: string, content: string): string {
	return createHash('sha256').update(kind).update('\n').update(content).digest('hex');
}

export async function loadAgentIndex(db: Database | Tx = getDb()): Promise<AgentIndex> {
	const rows = await db
		.select({
			id: agents.id,
			code: agents.code,
			rxnormCode: agents.rxnormCode,
			name: agents.name,
			synonyms: agents.synonyms,
			active: agents.active,
			usualInfusionH: sql<number>`coalesce((${agents.params}->>'usualInfusionH')::float8, 0.5)`,
			combination: sql<{ component: string; combinedPerComponent: number } | null>`${agents.params}->'combination'`
		})
		.from(agents);
	return buildAgentIndex(rows);
}

export class Rollback extends Error {
	constructor(readonly result: IngestResult) {
		super('rolled back');
	}
}

export type Prepared = {
	records: IntakeRecord[];
	rejections: Rejection[];
	entryCount: number;
	raw: string;
	hash: string;
	/** resource type and id per entry index, for outcomes of entries that never became records */
	describe: (index: number) => { resourceType: string | null; id: string | null };
	/** the copy of an entry kept in quarantine: the FHIR entry, or the CSV row with its line */
	rawOf: (index: number) => object;
	/** CSV rows: non-primary records share the row's line; FHIR: every record is its own entry */
	csv: boolean;
};

/** unique violation, deadlock, serialisation failure */
function isRetryable(error: unknown): boolean {
	const e = error as { code?: string; cause?: { code?: string } };
	const code = e?.code ?? e?.cause?.code;
	return code === '23505' || code === '40P01' || code === '40001';
}

/** A bundle that has passed the envelope check, read into records and rejections. */
export function prepareBundle(rawText: string, bundle: BundleEnvelope, agentIndex: AgentIndex, now: Date, hashKind = 'fhir-bundle'): Prepared {
	const { records, rejections } = parseEntries(bundle.entry, { now, agents: agentIndex });
	const entries = bundle.entry as ({ fullUrl?: unknown; resource?: { resourceType?: unknown; id?: unknown } } | null)[];
	return {
		records,
		rejections,
		entryCount: bundle.entry.length,
		raw: rawText,
		hash: contentHash(hashKind, canonicalJson(bundle)),
		describe: (i) => {
			const r = entries[i]?.resource;
			return {
				resourceType: typeof r?.resourceType === 'string' ? r.resourceType : null,
				id: typeof r?.id === 'string' ? r.id : null
			};
		},
		rawOf: (i) => {
			const entry = entries[i];
			return entry && typeof entry === 'object'
				? { format: 'fhir', fullUrl: entry.fullUrl ?? null, resource: entry.resource ?? null }
				: { format: 'fhir', fullUrl: null, resource: entry ?? null };
		},
		csv: false
	};
}

/** CSV rows (one chunk of an upload) read into records and rejections. */
export function prepareCsv(kind: CsvKind, header: string[], rows: CsvRow[], agentIndex: AgentIndex, now: Date, hashKind = `csv-${kind}`): Prepared {
	const records: IntakeRecord[] = [];
	const rejections: Rejection[] = [];
	for (const row of rows) {
		const read = readRow(kind, row, { now, agents: agentIndex });
		if (read.ok) records.push(...read.records);
		else rejections.push({ index: row.line, resourceType: null, sourceId: null, field: read.error.column, reason: read.error.reason });
	}
	const raw = rowsToCsv(header, rows);
	const idColumn = kind === 'results' ? 'result_id' : 'order_id';
	const byLine = new Map(rows.map((r) => [r.line, r]));
	return {
		records,
		rejections,
		entryCount: rows.length,
		raw,
		hash: contentHash(hashKind, `${rows[0]?.line ?? 0}\n${raw}`),
		describe: (line) => ({ resourceType: null, id: byLine.get(line)?.values[idColumn]?.trim() || null }),
		rawOf: (line) => ({ format: 'csv', kind, line, values: byLine.get(line)?.values ?? {} }),
		csv: true
	};
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
			entryCount: prepared.entryCount
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
		(r): r is EncounterRecord | OrderRecord | ResultRecord | RenalReplacementRecord =>
			r.kind === 'encounter' || r.kind === 'order' || r.kind === 'result' || r.kind === 'renal-replacement'
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
	await applyStops(tx, byKind('stop'), { setOutcome, reject, affectedOrders, csv: prepared.csv });

	// ── Results ───────────────────────────────────────────────────────────────────────────────────
	await upsertResults(tx, ok(byKind('result')), resolved, message.id, { setOutcome, reject, affectedPatients });
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
			after: { source: ctx.source, entries: prepared.entryCount, ...counts, ordersQueued }
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
		rejections
	};
	if (mode === 'dry-run' || (mode === 'all-or-nothing' && rejections.length > 0)) {
		throw new Rollback({ ...result, messageId: null, stored: false });
	}
	return result;
}

type Hooks = {
	setOutcome: (record: IntakeRecord, outcome: 'accepted' | 'duplicate', detail?: EntryOutcome['detail'], notes?: string[]) => void;
	reject: (record: IntakeRecord, field: string, reason: string) => void;
};

const bySourceId = (a: { sourceId: string }, b: { sourceId: string }) => (a.sourceId < b.sourceId ? -1 : a.sourceId > b.sourceId ? 1 : 0);

/** Last record per key wins; earlier identical ones are reported as duplicates of it. */
function lastPerKey<T extends IntakeRecord>(list: T[], key: (r: T) => string) {
	const map = new Map<string, T>();
	for (const r of list) map.set(key(r), r);
	return map;
}

async function upsertPatients(tx: Tx, list: PatientRecord[], hooks: Hooks & { affectedPatients: Set<string> }) {
	if (list.length === 0) return;
	const latest = lastPerKey(list, (r) => r.mrn);
	for (const r of list) if (latest.get(r.mrn) !== r) hooks.setOutcome(r, 'duplicate');
	const recs = [...latest.values()];
	const sourceIds = recs.map((r) => r.sourceId).filter((s): s is string => s !== null);
	const mrns = recs.map((r) => r.mrn);
	const existing = await tx
		.select({
			id: patients.id,
			sourceId: patients.sourceId,
			mrn: patients.mrn,
			givenName: patients.givenName,
			familyName: patients.familyName,
			birthDate: patients.birthDate,
			sex: patients.sex
		})
		.from(patients)
		.where(sourceIds.length ? or(inArray(patients.sourceId, sourceIds), inArray(patients.mrn, mrns)) : inArray(patients.mrn, mrns));
	const bySource = new Map(existing.filter((p) => p.sourceId).map((p) => [p.sourceId as string, p]));
	const byMrn = new Map(existing.map((p) => [p.mrn, p]));
	const inserts: PatientRecord[] = [];
	for (const r of recs) {
		const a = r.sourceId ? bySource.get(r.sourceId) : undefined;
		const b = byMrn.get(r.mrn);
		if ((a && b && a.id !== b.id) || (!a && b && r.sourceId && b.sourceId && b.sourceId !== r.sourceId)) {
			hooks.reject(r, 'identifier', `identifier: MRN ${r.mrn} already belongs to another patient (Patient/${b?.sourceId ?? b?.id})`);
			continue;
		}
		const target = a ?? b;
		if (!target) {
			inserts.push(r);
			continue;
		}
		const givenName = r.givenName || target.givenName;
		const familyName = r.familyName || target.familyName;
		const same =
			target.mrn === r.mrn &&
			target.givenName === givenName &&
			target.familyName === familyName &&
			target.birthDate === r.birthDate &&
			target.sex === r.sex &&
			(r.sourceId === null || target.sourceId === r.sourceId);
		if (same) {
			hooks.setOutcome(r, 'duplicate');
			continue;
		}
		await tx
			.update(patients)
			.set({ mrn: r.mrn, sourceId: r.sourceId ?? target.sourceId, givenName, familyName, birthDate: r.birthDate, sex: r.sex })
			.where(eq(patients.id, target.id));
		// age and sex feed the renal equations: their orders need a new look
		if (target.birthDate !== r.birthDate || target.sex !== r.sex) hooks.affectedPatients.add(target.id);
		hooks.setOutcome(r, 'accepted', 'updated');
	}
	if (inserts.length > 0) {
		await tx
			.insert(patients)
			.values(inserts.map((r) => ({ mrn: r.mrn, sourceId: r.sourceId, givenName: r.givenName, familyName: r.familyName, birthDate: r.birthDate, sex: r.sex })))
			.onConflictDoNothing();
		for (const r of inserts) hooks.setOutcome(r, 'accepted', 'created');
	}
}

/** One query for all references; returns the lookup. */
async function resolvePatients(tx: Tx, refs: PatientRef[]): Promise<(ref: PatientRef) => string | undefined> {
	const sourceIds = [...new Set(refs.map((r) => r.sourceId).filter((s): s is string => !!s))];
	const mrns = [...new Set(refs.map((r) => r.mrn).filter((s): s is string => !!s))];
	if (sourceIds.length === 0 && mrns.length === 0) return () => undefined;
	const conditions = [];
	if (sourceIds.length) conditions.push(inArray(patients.sourceId, sourceIds));
	if (mrns.length) conditions.push(inArray(patients.mrn, mrns));
	const found = await tx
		.select({ id: patients.id, sourceId: patients.sourceId, mrn: patients.mrn })
		.from(patients)
		.where(or(...conditions));
	const bySource = new Map(found.filter((p) => p.sourceId).map((p) => [p.sourceId as string, p.id]));
	const byMrn = new Map(found.map((p) => [p.mrn, p.id]));
	return (ref) => (ref.sourceId ? bySource.get(ref.sourceId) : undefined) ?? (ref.mrn ? byMrn.get(ref.mrn) : undefined);
}

const insertedFlag = sql<boolean>`(xmax = 0)`;

async function upsertEncounters(tx: Tx, list: EncounterRecord[], resolved: Map<IntakeRecord, string>, setOutcome: Hooks['setOutcome']) {
	if (list.length === 0) return;
	const latest = lastPerKey(list, (r) => r.sourceId);
	for (const r of list) if (latest.get(r.sourceId) !== r) setOutcome(r, 'duplicate');
	const recs = [...latest.values()].sort(bySourceId);
	const changed = await tx
		.insert(encounters)
		.values(
			recs.map((r) => ({
				patientId: resolved.get(r) as string,
				sourceId: r.sourceId,
				ward: r.ward,
				bed: r.bed,
				admittedAt: r.admittedAt,
				dischargedAt: r.dischargedAt
			}))
		)
		.onConflictDoUpdate({
			target: encounters.sourceId,
			set: {
				ward: sql`excluded.ward`,
				bed: sql`excluded.bed`,
				admittedAt: sql`excluded.admitted_at`,
				dischargedAt: sql`excluded.discharged_at`,
				updatedAt: sql`now()`
			},
			setWhere: sql`(encounters.ward, encounters.bed, encounters.admitted_at, encounters.discharged_at)
				is distinct from (excluded.ward, excluded.bed, excluded.admitted_at, excluded.discharged_at)`
		})
		.returning({ sourceId: encounters.sourceId, inserted: insertedFlag });
	const bySource = new Map(changed.map((c) => [c.sourceId, c.inserted]));
	for (const r of recs) {
		const inserted = bySource.get(r.sourceId);
		if (inserted === undefined) setOutcome(r, 'duplicate');
		else setOutcome(r, 'accepted', inserted ? 'created' : 'updated');
	}
}

/** Entry index of a Practitioner → the prescriber it was stored as. */
type PrescriberOfEntry = Map<number, string>;

/**
 * Practitioners into the directory, one at a time (a message names a few dozen): entries of one
 * Practitioner after the first are duplicates of it; an identifier that names another prescriber on
 * record quarantines the entry.
 */
async function savePractitioners(tx: Tx, list: PractitionerRecord[], hooks: Hooks): Promise<PrescriberOfEntry> {
	const prescriberOfEntry: PrescriberOfEntry = new Map();
	if (list.length === 0) return prescriberOfEntry;
	const latest = lastPerKey(list, (r) => r.key);
	const idOfKey = new Map<string, string>();
	// the same order of keys in every transaction keeps concurrent messages from deadlocking
	for (const r of [...latest.values()].sort((a, b) => (a.key < b.key ? -1 : a.key > b.key ? 1 : 0))) {
		const saved = await directory.saveFromFeed(tx, {
			name: r.name,
			named: r.named,
			identifiers: r.identifiers,
			email: r.email,
			emailProblem: r.emailProblem
		});
		if (!saved.ok) {
			hooks.reject(r, saved.field, saved.reason);
			continue;
		}
		idOfKey.set(r.key, saved.id);
		// a missing e-mail is said once: stored without one, or the address on record kept
		const emailNote =
			saved.notes.length || !r.emailProblem ? [] : [`telecom: no usable e-mail (${r.emailProblem}); the prescriber is stored with no e-mail on record`];
		const notes = [...emailNote, ...r.notes, ...saved.notes];
		if (saved.change === 'unchanged') hooks.setOutcome(r, 'duplicate', undefined, notes);
		else hooks.setOutcome(r, 'accepted', saved.change === 'created' ? 'created' : 'updated', notes);
	}
	for (const r of list) {
		const id = idOfKey.get(r.key);
		if (id) prescriberOfEntry.set(r.index, id);
		if (latest.get(r.key) !== r && id) hooks.setOutcome(r, 'duplicate');
		else if (latest.get(r.key) !== r) hooks.reject(r, 'id', `${r.key} was quarantined in this message (a later entry of the same Practitioner)`);
	}
	await directory.linkAccounts(tx, [...idOfKey.values()]);
	return prescriberOfEntry;
}

/** The prescriber a reference names: in this message, on record, or (an e-mail) added to the directory. */
async function resolvePrescriber(
	tx: Tx,
	ref: PrescriberRef,
	prescriberOfEntry: PrescriberOfEntry,
	options: { createByEmail: boolean }
): Promise<{ id: string; created?: boolean } | { problem: string }> {
	if (ref.kind === 'entry') {
		const id = prescriberOfEntry.get(ref.index);
		return id ? { id } : { problem: `${ref.label} (entry ${ref.index}) was quarantined in this message` };
	}
	if (ref.kind === 'identifier') {
		const id = await directory.findIdByIdentifier(tx, ref.identifier, ref.anySystem);
		return id ? { id } : { problem: `${ref.label} matches no prescriber on record` };
	}
	if (ref.kind === 'role') {
		const id = await directory.findIdByRoleKey(tx, ref.sourceKey);
		return id ? { id } : { problem: `${ref.label} matches no PractitionerRole on record` };
	}
	if (options.createByEmail) return directory.findOrCreateByEmail(tx, ref.email, ref.name);
	const id = await directory.findIdByEmail(tx, ref.email);
	return id ? { id } : { problem: `${ref.label} matches no prescriber on record` };
}

/** PractitionerRoles, by their source key; the practitioner must be in this message or on record. */
async function saveRoles(tx: Tx, list: PractitionerRoleRecord[], prescriberOfEntry: PrescriberOfEntry, hooks: Hooks) {
	if (list.length === 0) return;
	const latest = lastPerKey(list, (r) => r.sourceKey);
	for (const r of list) if (latest.get(r.sourceKey) !== r) hooks.setOutcome(r, 'duplicate');
	for (const r of [...latest.values()].sort((a, b) => (a.sourceKey < b.sourceKey ? -1 : a.sourceKey > b.sourceKey ? 1 : 0))) {
		const who = await resolvePrescriber(tx, r.practitioner, prescriberOfEntry, { createByEmail: false });
		if ('problem' in who) {
			hooks.reject(r, 'practitioner', `${who.problem}; send the Practitioner first or in the same message`);
			continue;
		}
		const change = await directory.saveRole(tx, who.id, r);
		const notes = [...r.notes];
		if (r.email && r.active !== false && (await directory.useRoleEmail(tx, who.id, r.email))) {
			notes.push(`the prescriber had no e-mail on record: the role's address ${r.email} is used`);
			await directory.linkAccounts(tx, [who.id]);
		}
		if (change === 'unchanged' && notes.length === r.notes.length) hooks.setOutcome(r, 'duplicate', undefined, notes);
		else hooks.setOutcome(r, 'accepted', change === 'created' ? 'created' : 'updated', notes);
	}
}

/** Each order's prescriber in the directory, and a note for a requester that names nobody Ebbline can find. */
async function resolveOrderPrescribers(tx: Tx, recs: OrderRecord[], prescriberOfEntry: PrescriberOfEntry) {
	const out = new Map<OrderRecord, { practitionerId: string | null; notes: string[] }>();
	const cache = new Map<string, Awaited<ReturnType<typeof resolvePrescriber>>>();
	const created: string[] = [];
	for (const r of recs) {
		if (!r.prescriber) {
			out.set(r, { practitionerId: null, notes: r.notes });
			continue;
		}
		const key = JSON.stringify(r.prescriber.kind === 'email' ? { kind: 'email', email: r.prescriber.email } : r.prescriber);
		let found = cache.get(key);
		if (!found) {
			found = await resolvePrescriber(tx, r.prescriber, prescriberOfEntry, { createByEmail: true });
			cache.set(key, found);
			if ('created' in found && found.created) created.push(found.id);
		}
		if ('problem' in found)
			out.set(r, { practitionerId: null, notes: [...r.notes, `${found.problem}; the order is kept with no prescriber from the directory`] });
		else out.set(r, { practitionerId: found.id, notes: r.notes });
	}
	await directory.linkAccounts(tx, created);
	return out;
}

async function upsertOrders(
	tx: Tx,
	list: OrderRecord[],
	resolved: Map<IntakeRecord, string>,
	hooks: Hooks & { affectedOrders: Set<string>; now: Date; prescriberOfEntry: PrescriberOfEntry }
) {
	if (list.length === 0) return;
	const latest = lastPerKey(list, (r) => r.sourceId);
	for (const r of list) if (latest.get(r.sourceId) !== r) hooks.setOutcome(r, 'duplicate');
	const recs = [...latest.values()].sort(bySourceId);
	const encounterIds = [...new Set(recs.map((r) => r.encounterSourceId).filter((s): s is string => !!s))];
	const encounterRows = encounterIds.length
		? await tx.select({ id: encounters.id, sourceId: encounters.sourceId }).from(encounters).where(inArray(encounters.sourceId, encounterIds))
		: [];
	const encounterOf = new Map(encounterRows.map((e) => [e.sourceId as string, e.id]));
	const inDirectory = await resolveOrderPrescribers(tx, recs, hooks.prescriberOfEntry);
	const prescriberOf = await directory.summaries(
		tx,
		[...inDirectory.values()].map((d) => d.practitionerId).filter((id): id is string => id !== null)
	);
	// an order that names its prescriber only by name finds their account by that name
	const wantsAccountByName = recs.some((r) => r.prescriberName && !inDirectory.get(r)?.practitionerId);
	const physicians = wantsAccountByName
		? await tx
				.select({ id: users.id, displayName: users.displayName })
				.from(users)
				.where(and(eq(users.role, 'physician'), eq(users.active, true)))
		: [];
	const byName = new Map(physicians.map((u) => [u.displayName.trim().toLowerCase(), u]));
	const changed = await tx
		.insert(orders)
		.values(
			recs.map((r) => {
				const practitionerId = inDirectory.get(r)?.practitionerId ?? null;
				const listed = practitionerId ? prescriberOf.get(practitionerId) : undefined;
				const account = listed ? null : r.prescriberName ? byName.get(r.prescriberName.toLowerCase()) : undefined;
				return {
					patientId: resolved.get(r) as string,
					encounterId: r.encounterSourceId ? (encounterOf.get(r.encounterSourceId) ?? null) : null,
					agentId: r.agentId,
					sourceId: r.sourceId,
					prescriberId: listed?.userId ?? account?.id ?? null,
					prescriberName: r.prescriberName ?? listed?.name ?? null,
					practitionerId,
					doseMg: r.doseMg,
					intervalH: r.intervalH,
					infusionH: r.infusionH,
					route: r.route,
					status: 'active' as const,
					startAt: r.startAt,
					stoppedAt: null
				};
			})
		)
		.onConflictDoUpdate({
			target: orders.sourceId,
			set: {
				encounterId: sql`coalesce(excluded.encounter_id, orders.encounter_id)`,
				agentId: sql`excluded.agent_id`,
				prescriberId: sql`coalesce(excluded.prescriber_id, orders.prescriber_id)`,
				prescriberName: sql`coalesce(excluded.prescriber_name, orders.prescriber_name)`,
				practitionerId: sql`coalesce(excluded.practitioner_id, orders.practitioner_id)`,
				doseMg: sql`excluded.dose_mg`,
				intervalH: sql`excluded.interval_h`,
				infusionH: sql`excluded.infusion_h`,
				route: sql`excluded.route`,
				status: sql`excluded.status`,
				startAt: sql`excluded.start_at`,
				stoppedAt: sql`null`,
				updatedAt: sql`now()`
			},
			setWhere: sql`(orders.agent_id, orders.dose_mg, orders.interval_h, orders.infusion_h, orders.route, orders.status, orders.start_at)
				is distinct from (excluded.agent_id, excluded.dose_mg, excluded.interval_h, excluded.infusion_h, excluded.route, excluded.status, excluded.start_at)
				or (excluded.encounter_id is not null and orders.encounter_id is distinct from excluded.encounter_id)
				or (excluded.practitioner_id is not null and orders.practitioner_id is distinct from excluded.practitioner_id)
				or (excluded.prescriber_id is not null and orders.prescriber_id is distinct from excluded.prescriber_id)
				or (excluded.prescriber_name is not null and orders.prescriber_name is distinct from excluded.prescriber_name)`
		})
		.returning({ id: orders.id, sourceId: orders.sourceId, inserted: insertedFlag });
	const bySource = new Map(changed.map((c) => [c.sourceId as string, c]));
	for (const r of recs) {
		const c = bySource.get(r.sourceId);
		const notes = inDirectory.get(r)?.notes ?? [];
		if (!c) hooks.setOutcome(r, 'duplicate', undefined, notes);
		else {
			hooks.affectedOrders.add(c.id);
			hooks.setOutcome(r, 'accepted', c.inserted ? 'created' : 'updated', notes);
		}
	}
}

async function applyStops(tx: Tx, list: StopRecord[], hooks: Hooks & { affectedOrders: Set<string>; csv: boolean }) {
	if (list.length === 0) return;
	const latest = lastPerKey(list, (r) => r.sourceId);
	for (const r of list) if (latest.get(r.sourceId) !== r) hooks.setOutcome(r, 'duplicate');
	const recs = [...latest.values()];
	const known = await tx
		.select({ id: orders.id, sourceId: orders.sourceId, status: orders.status })
		.from(orders)
		.where(
			inArray(
				orders.sourceId,
				recs.map((r) => r.sourceId)
			)
		);
	const bySource = new Map(known.map((o) => [o.sourceId as string, o]));
	for (const r of recs) {
		const order = bySource.get(r.sourceId);
		if (!order) {
			const field = hooks.csv ? 'order_id' : 'id';
			const what = hooks.csv ? `order ${r.sourceId}` : `MedicationRequest/${r.sourceId}`;
			hooks.reject(r, field, `${field} ${r.sourceId}: stop for an unknown order (${what} was never received, so there is nothing to stop)`);
			continue;
		}
		if (order.status === 'stopped') {
			hooks.setOutcome(r, 'duplicate');
			continue;
		}
		await tx
			.update(orders)
			.set({ status: 'stopped', stoppedAt: sql`greatest(${orders.startAt}, ${r.stoppedAt.toISOString()}::timestamptz)`, updatedAt: new Date() })
			.where(eq(orders.id, order.id));
		// the stopped order is assessed once more so that rule evaluation can close its flags
		hooks.affectedOrders.add(order.id);
		hooks.setOutcome(r, 'accepted', 'stopped');
	}
}

function sameResult(a: ResultRecord, b: ResultRecord) {
	return a.value === b.value && a.unit === b.unit && a.loinc === b.loinc && a.observedAt.getTime() === b.observedAt.getTime();
}

type LabRow = {
	patient_id: string;
	analyte: 'creatinine' | 'albumin';
	loinc: string;
	value: number;
	unit: string;
	value_normalised: number;
	unit_normalised: string;
	observed_at: Date;
	source_id: string;
	message_id: string;
};
type BodyRow = Omit<LabRow, 'analyte' | 'loinc' | 'unit_normalised'> & { kind: 'height' | 'weight' };
type Changed = { sourceId: string; patientId: string; inserted: boolean };

/**
 * Results are upserted from one JSON parameter read with jsonb_to_recordset: a bundle's hundred rows
 * as separate parameters cost more to build and bind than to store. A row whose stored values are the
 * same is left alone and not returned (a duplicate).
 */
const LAB_UPSERT = (rows: string) => sql`
	insert into lab_results (patient_id, analyte, loinc, value, unit, value_normalised, unit_normalised, observed_at, source_id, message_id)
	select patient_id, analyte, loinc, value, unit, value_normalised, unit_normalised, observed_at, source_id, message_id
	from jsonb_to_recordset(${rows}::jsonb) as v(patient_id uuid, analyte analyte, loinc text, value float8, unit text,
		value_normalised float8, unit_normalised text, observed_at timestamptz, source_id text, message_id uuid)
	on conflict (source_id) do update set
		patient_id = excluded.patient_id, analyte = excluded.analyte, loinc = excluded.loinc, value = excluded.value,
		unit = excluded.unit, value_normalised = excluded.value_normalised, unit_normalised = excluded.unit_normalised,
		observed_at = excluded.observed_at, message_id = excluded.message_id
	where (lab_results.patient_id, lab_results.loinc, lab_results.value, lab_results.unit, lab_results.observed_at)
		is distinct from (excluded.patient_id, excluded.loinc, excluded.value, excluded.unit, excluded.observed_at)
	returning source_id as "sourceId", patient_id as "patientId", (xmax = 0) as inserted`;

const BODY_UPSERT = (rows: string) => sql`
	insert into body_measurements (patient_id, kind, value, unit, value_normalised, observed_at, source_id, message_id)
	select patient_id, kind, value, unit, value_normalised, observed_at, source_id, message_id
	from jsonb_to_recordset(${rows}::jsonb) as v(patient_id uuid, kind measurement_kind, value float8, unit text,
		value_normalised float8, observed_at timestamptz, source_id text, message_id uuid)
	on conflict (source_id) do update set
		patient_id = excluded.patient_id, kind = excluded.kind, value = excluded.value, unit = excluded.unit,
		value_normalised = excluded.value_normalised, observed_at = excluded.observed_at, message_id = excluded.message_id
	where (body_measurements.patient_id, body_measurements.kind, body_measurements.value, body_measurements.unit, body_measurements.observed_at)
		is distinct from (excluded.patient_id, excluded.kind, excluded.value, excluded.unit, excluded.observed_at)
	returning source_id as "sourceId", patient_id as "patientId", (xmax = 0) as inserted`;

async function upsertRows<T>(tx: Tx, statement: (rows: string) => SQL, rows: T[]): Promise<Changed[]> {
	const changed: Changed[] = [];
	for (let i = 0; i < rows.length; i += 4000) {
		const result = await tx.execute(statement(JSON.stringify(rows.slice(i, i + 4000))));
		changed.push(...Array.from(result as unknown as Iterable<Changed>));
	}
	return changed;
}

async function upsertResults(
	tx: Tx,
	list: ResultRecord[],
	resolved: Map<IntakeRecord, string>,
	messageId: string,
	hooks: Hooks & { affectedPatients: Set<string> }
) {
	if (list.length === 0) return;
	const isLab = (r: ResultRecord) => r.measure === 'creatinine' || r.measure === 'albumin';
	const firstById = new Map<string, ResultRecord>();
	const keep: ResultRecord[] = [];
	for (const r of list) {
		const key = `${isLab(r) ? 'lab' : 'body'}:${r.sourceId}`;
		const first = firstById.get(key);
		if (!first) {
			firstById.set(key, r);
			keep.push(r);
		} else if (sameResult(first, r) && resolved.get(first) === resolved.get(r)) hooks.setOutcome(r, 'duplicate');
		else hooks.reject(r, 'id', `id ${r.sourceId} appears twice in this message with different values; send one version`);
	}
	// the same order of keys in every transaction keeps concurrent messages from deadlocking
	const labs = keep.filter(isLab).sort(bySourceId);
	const body = keep.filter((r) => !isLab(r)).sort(bySourceId);
	const stored = (r: ResultRecord) => ({
		patient_id: resolved.get(r) as string,
		value: r.value,
		unit: r.unit,
		value_normalised: r.valueNormalised,
		observed_at: r.observedAt,
		source_id: r.sourceId,
		message_id: messageId
	});
	const changedLabs = await upsertRows<LabRow>(
		tx,
		LAB_UPSERT,
		labs.map((r) => ({
			...stored(r),
			analyte: r.measure as LabRow['analyte'],
			loinc: r.loinc,
			unit_normalised: r.unitNormalised
		}))
	);
	const changedBody = await upsertRows<BodyRow>(
		tx,
		BODY_UPSERT,
		body.map((r) => ({ ...stored(r), kind: r.measure as BodyRow['kind'] }))
	);
	const labChange = new Map(changedLabs.map((c) => [c.sourceId, c]));
	const bodyChange = new Map(changedBody.map((c) => [c.sourceId, c]));
	for (const r of keep) {
		const c = (isLab(r) ? labChange : bodyChange).get(r.sourceId);
		if (!c) hooks.setOutcome(r, 'duplicate');
		else {
			hooks.affectedPatients.add(c.patientId);
			hooks.setOutcome(r, 'accepted', c.inserted ? 'created' : 'updated');
		}
	}
}

async function applyRetractions(tx: Tx, list: RetractRecord[], hooks: Hooks & { affectedPatients: Set<string> }) {
	if (list.length === 0) return;
	const ids = [...new Set(list.map((r) => r.sourceId))];
	const [labs, body] = await Promise.all([
		tx.delete(labResults).where(inArray(labResults.sourceId, ids)).returning({ sourceId: labResults.sourceId, patientId: labResults.patientId }),
		tx
			.delete(bodyMeasurements)
			.where(inArray(bodyMeasurements.sourceId, ids))
			.returning({ sourceId: bodyMeasurements.sourceId, patientId: bodyMeasurements.patientId })
	]);
	const gone = new Map([...labs, ...body].map((r) => [r.sourceId as string, r.patientId]));
	const seen = new Set<string>();
	for (const r of list) {
		const patientId = gone.get(r.sourceId);
		if (patientId && !seen.has(r.sourceId)) {
			seen.add(r.sourceId);
			hooks.affectedPatients.add(patientId);
			hooks.setOutcome(r, 'accepted', 'retracted');
		} else if (patientId) hooks.setOutcome(r, 'duplicate');
		else hooks.reject(r, 'id', `id ${r.sourceId}: no stored result has this id, so there is nothing to withdraw`);
	}
}

/**
 * Dialysis sessions and conditions, idempotent by source id ("Procedure/<id>", "Condition/<id>"): the
 * same content again changes nothing; a changed one is updated; entered-in-error removes it.
 */
async function upsertRenalReplacement(
	tx: Tx,
	list: RenalReplacementRecord[],
	resolved: Map<IntakeRecord, string>,
	messageId: string,
	hooks: Hooks & { affectedPatients: Set<string> }
) {
	if (list.length === 0) return;
	for (const r of [...list].sort(bySourceId)) {
		const patientId = resolved.get(r) as string;
		if (r.remove) {
			const gone = await tx
				.delete(renalReplacementEvents)
				.where(eq(renalReplacementEvents.sourceId, r.sourceId))
				.returning({ patientId: renalReplacementEvents.patientId });
			if (gone.length === 0) hooks.reject(r, 'id', `id ${r.sourceId}: nothing stored has this id, so there is nothing to withdraw`);
			else {
				hooks.affectedPatients.add(gone[0].patientId);
				hooks.setOutcome(r, 'accepted', 'retracted');
			}
			continue;
		}
		const rows = Array.from(
			(await tx.execute(sql`
				insert into renal_replacement_events (patient_id, kind, mode, from_at, to_at, source_id, message_id)
				values (${patientId}::uuid, ${r.eventKind}, ${r.mode}, ${r.from.toISOString()}::timestamptz, ${r.to === null ? null : r.to.toISOString()}::timestamptz, ${r.sourceId}, ${messageId}::uuid)
				on conflict (source_id) do update set patient_id = excluded.patient_id, kind = excluded.kind, mode = excluded.mode,
					from_at = excluded.from_at, to_at = excluded.to_at, message_id = excluded.message_id
				where (renal_replacement_events.patient_id, renal_replacement_events.kind, renal_replacement_events.mode, renal_replacement_events.from_at, renal_replacement_events.to_at)
					is distinct from (excluded.patient_id, excluded.kind, excluded.mode, excluded.from_at, excluded.to_at)
				returning (xmax = 0) as inserted`)) as unknown as Iterable<{ inserted: boolean }>
		);
		if (rows.length === 0) hooks.setOutcome(r, 'duplicate');
		else {
			hooks.affectedPatients.add(patientId);
			hooks.setOutcome(r, 'accepted', rows[0].inserted ? 'created' : 'updated');
		}
	}
}
