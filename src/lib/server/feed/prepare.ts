// A message read before it is stored: records and rejections, the raw text kept and the content hash
// that makes re-sending harmless (canonical JSON for a bundle; the rows for a CSV chunk).
import { createHash } from 'node:crypto';
import { sql } from 'drizzle-orm';
import { getDb, type Database, type Tx } from '../db';
import { agents } from '../db/schema';
import { buildAgentIndex, type AgentIndex } from './agent-map';
import { readRow, rowsToCsv, type CsvKind, type CsvRow } from './csv';
import { parseEntries, type BundleEnvelope } from './fhir';
import type { IntakeRecord, Rejection } from './types';

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

/** The column that names a row's record in the per-row outcomes. */
const ID_COLUMN: Record<CsvKind, string> = { results: 'result_id', orders: 'order_id', administrations: 'administration_id', levels: 'level_id' };

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
	const idColumn = ID_COLUMN[kind];
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
