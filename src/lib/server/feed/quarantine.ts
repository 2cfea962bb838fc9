// Quarantine: every rejected entry with its reason and raw content. An administrator fixes the cause
// (maps an unknown agent name, corrects a unit or value) and re-processes the entry through the same
// ingest path, or discards it with a reason. Every decision is audited.
import { and, count, desc, eq, sql } from 'drizzle-orm';
import * as audit from '../audit';
import { getDb } from '../db';
import { agents, feedMessages, quarantine } from '../db/schema';
import { nameKey } from './agent-map';
import { isCsvKind, type CsvKind } from './csv';
import { bundleSchema } from './fhir';
import { firstIssue } from './fhir-common';
import { applyIntake, Rollback, type Actor, type IngestResult } from './ingest';
import { canonicalJson, contentHash, loadAgentIndex, prepareBundle, prepareCsv } from './prepare';

/** SHA-256 of an entry's canonical JSON: names the raw resource in the audit log without copying it. */
const fingerprint = (raw: unknown) => contentHash('quarantine-entry', canonicalJson(raw));
import type { FeedSource } from './types';

export type QuarantineStatus = 'open' | 'reprocessed' | 'discarded';

export type FhirRaw = { format: 'fhir'; fullUrl: string | null; resource: unknown };
export type CsvRaw = { format: 'csv'; kind: CsvKind; line: number; values: Record<string, string> };
export type QuarantineRaw = FhirRaw | CsvRaw;

export async function list(options: { status?: QuarantineStatus; limit?: number; offset?: number } = {}) {
	const status = options.status ?? 'open';
	const db = getDb();
	const [rows, [{ total }]] = await Promise.all([
		db
			.select({
				id: quarantine.id,
				source: quarantine.source,
				entryIndex: quarantine.entryIndex,
				resourceType: quarantine.resourceType,
				reason: quarantine.reason,
				field: quarantine.field,
				raw: quarantine.raw,
				status: quarantine.status,
				decisionNote: quarantine.decisionNote,
				decidedAt: quarantine.decidedAt,
				createdAt: quarantine.createdAt,
				messageId: quarantine.messageId,
				receivedAt: feedMessages.receivedAt
			})
			.from(quarantine)
			.leftJoin(feedMessages, eq(feedMessages.id, quarantine.messageId))
			.where(eq(quarantine.status, status))
			.orderBy(desc(quarantine.createdAt), quarantine.entryIndex)
			.limit(options.limit ?? 50)
			.offset(options.offset ?? 0),
		db.select({ total: count() }).from(quarantine).where(eq(quarantine.status, status))
	]);
	return { rows: rows.map((r) => ({ ...r, raw: r.raw as QuarantineRaw })), total };
}

export async function counts() {
	const rows = await getDb().select({ status: quarantine.status, n: count() }).from(quarantine).groupBy(quarantine.status);
	const out: Record<QuarantineStatus, number> = { open: 0, reprocessed: 0, discarded: 0 };
	for (const r of rows) out[r.status] = r.n;
	return out;
}

export class QuarantineError extends Error {
	constructor(
		message: string,
		readonly field: string = 'form'
	) {
		super(message);
	}
}

export type ReprocessOutcome = { ok: true; outcome: 'accepted' | 'duplicate'; ordersQueued: number } | { ok: false; field: string; reason: string };

function isRaw(value: unknown): value is QuarantineRaw {
	const v = value as { format?: unknown; kind?: unknown; values?: unknown };
	return !!v && typeof v === 'object' && (v.format === 'fhir' || (v.format === 'csv' && typeof v.kind === 'string' && isCsvKind(v.kind) && !!v.values));
}

/**
 * Re-processes one open entry through the same checks and writes as the feed, optionally with
 * corrected content (the FHIR resource, or the CSV row's values). Succeeds only when the entry is
 * accepted (or was by now already stored); otherwise nothing changes and the new reason is returned.
 */
export async function reprocess(id: string, who: Actor, correctedContent?: unknown): Promise<ReprocessOutcome> {
	const db = getDb();
	const [row] = await db.select().from(quarantine).where(eq(quarantine.id, id));
	if (!row) throw new QuarantineError('That entry is no longer in quarantine.');
	if (row.status !== 'open') throw new QuarantineError(`That entry was already ${row.status}.`);
	const original = row.raw as QuarantineRaw;
	const corrected =
		correctedContent === undefined
			? undefined
			: original.format === 'fhir'
				? { ...original, resource: correctedContent }
				: { ...original, values: correctedContent };
	const raw = corrected ?? row.raw;
	if (!isRaw(raw)) throw new QuarantineError('The corrected content is not an entry Ebbline can read.', 'raw');
	if (raw.format === 'csv' && (typeof raw.values !== 'object' || Array.isArray(raw.values))) {
		throw new QuarantineError('The corrected row must be an object of column: value.', 'raw');
	}
	const now = new Date();
	const agentIndex = await loadAgentIndex();
	let prepared;
	if (raw.format === 'fhir') {
		const bundle = { resourceType: 'Bundle', type: 'batch', entry: [{ fullUrl: raw.fullUrl ?? undefined, resource: raw.resource }] };
		const envelope = bundleSchema.safeParse(bundle);
		if (!envelope.success) return { ok: false, ...firstIssue(envelope.error) };
		prepared = prepareBundle(JSON.stringify(bundle), envelope.data, agentIndex, now, `reprocess:${id}`);
	} else {
		const values = Object.fromEntries(Object.entries(raw.values).map(([k, v]) => [k, String(v ?? '')]));
		prepared = prepareCsv(raw.kind, Object.keys(values), [{ line: raw.line, values }], agentIndex, now, `reprocess:${id}`);
	}
	prepared.hash = contentHash(`reprocess:${id}`, canonicalJson(raw));
	try {
		return await db.transaction(async (tx) => {
			// lock the row so that two administrators cannot both decide it
			const [locked] = await tx.select({ status: quarantine.status }).from(quarantine).where(eq(quarantine.id, id)).for('update');
			if (locked?.status !== 'open') throw new QuarantineError(`That entry was already ${locked?.status ?? 'removed'}.`);
			const result: IngestResult = await applyIntake(tx, prepared, {
				source: row.source as FeedSource,
				actor: who,
				uploadedBy: who.actorId,
				now,
				mode: 'all-or-nothing'
			});
			const entry = result.entries[0];
			const outcome = entry?.outcome === 'accepted' ? 'accepted' : 'duplicate';
			const edited = corrected !== undefined && canonicalJson(corrected) !== canonicalJson(row.raw);
			const note = `${outcome === 'accepted' ? 'accepted' : 'already stored'} on re-processing${edited ? ' after correction' : ''}`;
			await tx.update(quarantine).set({ status: 'reprocessed', decidedBy: who.actorId, decidedAt: now, decisionNote: note }).where(eq(quarantine.id, id));
			await audit.record(
				{
					...who,
					action: 'quarantine.reprocessed',
					objectType: 'quarantine',
					objectId: id,
					// the raw resource stays on the quarantine entry and the stored message; the audit keeps a fingerprint
					before: { reason: row.reason, rawSha256: fingerprint(row.raw) },
					after: { outcome, messageId: result.messageId, corrected: edited, ...(edited ? { correctedSha256: fingerprint(corrected) } : {}) }
				},
				tx
			);
			return { ok: true as const, outcome, ordersQueued: result.ordersQueued };
		});
	} catch (error) {
		if (error instanceof Rollback) {
			const r = error.result.rejections[0];
			return { ok: false, field: r?.field ?? 'raw', reason: r?.reason ?? 'the entry was not accepted' };
		}
		throw error;
	}
}

/** Discards an entry for good; the reason is required and audited. */
export async function discard(id: string, reason: string, who: Actor) {
	const text = reason.trim();
	if (text.length < 3) throw new QuarantineError('Say why the entry is discarded (at least 3 characters).', 'reason');
	return getDb().transaction(async (tx) => {
		const [row] = await tx
			.update(quarantine)
			.set({ status: 'discarded', decidedBy: who.actorId, decidedAt: new Date(), decisionNote: text })
			.where(and(eq(quarantine.id, id), eq(quarantine.status, 'open')))
			.returning({ id: quarantine.id, reason: quarantine.reason });
		if (!row) throw new QuarantineError('That entry is no longer open.');
		await audit.record(
			// the person's reason is kept on the entry (decision_note), not copied into the audit log
			{ ...who, action: 'quarantine.discarded', objectType: 'quarantine', objectId: id, before: { reason: row.reason }, after: { status: 'discarded' } },
			tx
		);
		return row;
	});
}

/** The agent name an order used, when its entry was quarantined as an unknown agent. */
export function unknownAgentName(raw: QuarantineRaw): string | null {
	if (raw.format === 'csv') return raw.values.agent?.trim() || null;
	const r = raw.resource as { medicationCodeableConcept?: { text?: string; coding?: { display?: string; code?: string }[] } } | null;
	const concept = r?.medicationCodeableConcept;
	return concept?.text?.trim() || concept?.coding?.find((c) => c.display)?.display?.trim() || concept?.coding?.find((c) => c.code)?.code?.trim() || null;
}

/**
 * Teaches the agent library a name (as a synonym of the chosen agent), then re-processes the entry.
 * The synonym stays for future orders; both steps are audited.
 */
export async function mapAgentAndReprocess(id: string, agentId: string, name: string, who: Actor): Promise<ReprocessOutcome> {
	const synonym = name.trim();
	if (!synonym) throw new QuarantineError('Give the name to map.', 'name');
	const db = getDb();
	await db.transaction(async (tx) => {
		const [agent] = await tx.select({ id: agents.id, name: agents.name, synonyms: agents.synonyms }).from(agents).where(eq(agents.id, agentId)).for('update');
		if (!agent) throw new QuarantineError('Choose an agent from the library.', 'agentId');
		const taken = await tx.select({ id: agents.id, name: agents.name, synonyms: agents.synonyms, code: agents.code }).from(agents);
		const key = nameKey(synonym);
		const clash = taken.find((a) => a.id !== agentId && [a.name, a.code, ...a.synonyms].some((n) => nameKey(n) === key));
		if (clash) throw new QuarantineError(`'${synonym}' already names ${clash.name}; choose that agent or another name.`, 'name');
		if ([agent.name, ...agent.synonyms].some((n) => nameKey(n) === key)) return;
		await tx
			.update(agents)
			.set({ synonyms: sql`array_append(${agents.synonyms}, ${synonym})`, updatedBy: who.actorId })
			.where(eq(agents.id, agentId));
		await audit.record(
			{
				...who,
				action: 'agent.synonym_added',
				objectType: 'agent',
				objectId: agentId,
				before: { synonyms: agent.synonyms },
				after: { synonyms: [...agent.synonyms, synonym] }
			},
			tx
		);
	});
	return reprocess(id, who);
}
