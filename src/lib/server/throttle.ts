import { eq, sql } from 'drizzle-orm';
import { getDb } from './db';
import { signInThrottle } from './db/schema';

/** After this many failures in a row an account ("email:…") is locked for LOCK_MINUTES. */
export const MAX_FAILURES = 5;
/**
 * An address ("ip:…") gets more room: a whole ward behind one proxy address shares it, so it locks
 * only on a spray of failures across accounts.
 */
export const MAX_ADDRESS_FAILURES = 20;

export function limitFor(key: string) {
	return key.startsWith('ip:') ? MAX_ADDRESS_FAILURES : MAX_FAILURES;
}
export const LOCK_MINUTES = 15;
/** Failures older than this are forgotten. */
const WINDOW_MINUTES = 15;

export type ThrottleState = { locked: boolean; lockedUntil: Date | null; failures: number; delayMs: number };

/** Slow-down grows with each failure before the lock: 0, 0, 0.5 s, 1 s, 2 s. */
export function delayFor(failures: number): number {
	return failures < 2 ? 0 : Math.min(2000, 250 * 2 ** (Math.min(failures, 10) - 1));
}

export async function check(key: string, now = new Date()): Promise<ThrottleState> {
	const [row] = await getDb().select().from(signInThrottle).where(eq(signInThrottle.key, key));
	if (!row) return { locked: false, lockedUntil: null, failures: 0, delayMs: 0 };
	if (row.lockedUntil && row.lockedUntil > now) {
		return { locked: true, lockedUntil: row.lockedUntil, failures: row.failures, delayMs: 0 };
	}
	const stale = now.getTime() - row.lastFailureAt.getTime() > WINDOW_MINUTES * 60_000;
	const failures = stale || row.lockedUntil ? 0 : row.failures;
	return { locked: false, lockedUntil: null, failures, delayMs: delayFor(failures) };
}

/** Count one failure; returns true when this failure locked the key. */
export async function fail(key: string, now = new Date()): Promise<boolean> {
	const state = await check(key, now);
	const failures = state.failures + 1;
	const lockedUntil = failures >= limitFor(key) ? new Date(now.getTime() + LOCK_MINUTES * 60_000) : null;
	await getDb()
		.insert(signInThrottle)
		.values({ key, failures, lastFailureAt: now, lockedUntil })
		.onConflictDoUpdate({
			target: signInThrottle.key,
			set: { failures: sql`excluded.failures`, lastFailureAt: sql`excluded.last_failure_at`, lockedUntil: sql`excluded.locked_until` }
		});
	return lockedUntil !== null;
}

export async function clear(key: string) {
	await getDb().delete(signInThrottle).where(eq(signInThrottle.key, key));
}
