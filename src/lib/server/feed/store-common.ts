// What the store steps of one message share.
import { sql } from 'drizzle-orm';
import type { EntryOutcome, IntakeRecord } from './types';

/** How a store step reports each record: stored (or unchanged), or rejected with the field at fault. */
export type Hooks = {
	setOutcome: (record: IntakeRecord, outcome: 'accepted' | 'duplicate', detail?: EntryOutcome['detail'], notes?: string[]) => void;
	reject: (record: IntakeRecord, field: string, reason: string) => void;
};

export const bySourceId = (a: { sourceId: string }, b: { sourceId: string }) => (a.sourceId < b.sourceId ? -1 : a.sourceId > b.sourceId ? 1 : 0);

/** Last record per key wins; earlier identical ones are reported as duplicates of it. */
export function lastPerKey<T extends IntakeRecord>(list: T[], key: (r: T) => string) {
	const map = new Map<string, T>();
	for (const r of list) map.set(key(r), r);
	return map;
}

/** true for a row the upsert inserted, false for one it updated */
export const insertedFlag = sql<boolean>`(xmax = 0)`;
