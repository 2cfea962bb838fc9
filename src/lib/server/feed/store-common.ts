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

/**
 * The records to store, one per key (the last one wins; the earlier ones are reported as duplicates
 * of it), in key order: the same order in every transaction keeps concurrent messages from deadlocking.
 */
export function latestPerKey<T extends IntakeRecord>(list: T[], key: (r: T) => string, setOutcome: Hooks['setOutcome']): T[] {
	const latest = lastPerKey(list, key);
	for (const r of list) if (latest.get(key(r)) !== r) setOutcome(r, 'duplicate');
	return [...latest.values()].sort((a, b) => (key(a) < key(b) ? -1 : key(a) > key(b) ? 1 : 0));
}

/** true for a row the upsert inserted, false for one it updated */
export const insertedFlag = sql<boolean>`(xmax = 0)`;
