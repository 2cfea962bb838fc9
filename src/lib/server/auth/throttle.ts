import { eq, sql } from 'drizzle-orm';
import { getDb } from '../db';
import { signInThrottle } from '../db/schema';

/** After this many failures in a row an account ("email:…") is locked for LOCK_MINUTES. */
export const MAX_FAILURES = 5;
/**
 * An address ("ip:…") gets more room: a whole ward behind one proxy address shares it. Its lock
 * refuses wrong passwords only; the right password for an active account still signs in, so a
 * spray of guesses from one address cannot lock a hospital out.
 */
export const MAX_ADDRESS_FAILURES = 20;

export function limitFor(key: string) {
	return key.startsWith('ip:') ? MAX_ADDRESS_FAILURES : MAX_FAILURES;
}
export const LOCK_MINUTES = 15;
/** Failures older than this are forgotten. */
const WINDOW_MINUTES = 15;
const MAX_DELAY_MS = 2000;

export type ThrottleState = { locked: boolean; lockedUntil: Date | null; failures: number; delayMs: number };

/** Slow-down grows with each failure before the lock: 0, 0, 0.5 s, 1 s, 2 s. */
export function delayFor(failures: number): number {
	return failures < 2 ? 0 : Math.min(MAX_DELAY_MS, 250 * 2 ** (Math.min(failures, 10) - 1));
}

export async function check(key: string, now = new Date()): Promise<ThrottleState> {
	const [row] = await getDb().select().from(signInThrottle).where(eq(signInThrottle.key, key));
	if (!row) return { locked: false, lockedUntil: null, failures: 0, delayMs: 0 };
	if (row.lockedUntil && row.lockedUntil > now) {
		return { locked: true, lockedUntil: row.lockedUntil, failures: row.failures, delayMs: MAX_DELAY_MS };
	}
	const stale = now.getTime() - row.lastFailureAt.getTime() > WINDOW_MINUTES * 60_000;
	const failures = stale || row.lockedUntil ? 0 : row.failures;
	return { locked: false, lockedUntil: null, failures, delayMs: delayFor(failures) };
}

export type FailResult = { failures: number; lockedUntil: Date | null; lockedNow: boolean };

/**
 * Counts one failure in one statement, so parallel failures are all counted: the row lock taken by
 * ON CONFLICT DO UPDATE makes each see the count the one before it wrote. The count starts again
 * after a lock has run out or after WINDOW_MINUTES without a failure; failures during a lock still
 * count but do not prolong it. `lockedNow` is true for the one failure that reached the limit.
 */
export async function fail(key: string, now = new Date()): Promise<FailResult> {
	const limit = limitFor(key);
	const lockEnd = new Date(now.getTime() + LOCK_MINUTES * 60_000);
	const at = (date: Date) => sql`${date.toISOString()}::timestamptz`;
	const t = signInThrottle;
	const lockedStill = sql`${t.lockedUntil} > ${at(now)}`;
	const next = sql`case
		when ${lockedStill} then ${t.failures} + 1
		when ${t.lockedUntil} is not null or ${t.lastFailureAt} < ${at(new Date(now.getTime() - WINDOW_MINUTES * 60_000))} then 1
		else ${t.failures} + 1 end`;
	const [row] = await getDb()
		.insert(t)
		.values({ key, failures: 1, lastFailureAt: now, lockedUntil: limit <= 1 ? lockEnd : null })
		.onConflictDoUpdate({
			target: t.key,
			set: {
				failures: next,
				lastFailureAt: now,
				lockedUntil: sql`case when ${lockedStill} then ${t.lockedUntil} when ${next} >= ${limit} then ${at(lockEnd)} else null end`
			}
		})
		.returning({ failures: t.failures, lockedUntil: t.lockedUntil });
	return { failures: row.failures, lockedUntil: row.lockedUntil, lockedNow: row.failures === limit && row.lockedUntil !== null };
}

export async function clear(key: string) {
	await getDb().delete(signInThrottle).where(eq(signInThrottle.key, key));
}
