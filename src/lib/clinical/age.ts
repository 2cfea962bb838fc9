// Age in completed years without Date getters (they cost ~0.1 µs each in V8, which matters at 200,000
// assessments per second). Calendar arithmetic in UTC.
import { requireDate } from './errors';

const DAY_MS = 86_400_000;

/**
 * UTC calendar date of an instant packed as yyyymmdd (e.g. 19600512), by the days-to-civil algorithm for the
 * proleptic Gregorian calendar (H. Hinnant, "chrono-compatible low-level date algorithms", public domain).
 */
export function utcYmd(ms: number): number {
	const z = Math.floor(ms / DAY_MS) + 719468;
	const era = Math.floor(z / 146097);
	const doe = z - era * 146097;
	const yoe = Math.floor((doe - Math.floor(doe / 1460) + Math.floor(doe / 36524) - Math.floor(doe / 146096)) / 365);
	const doy = doe - (365 * yoe + Math.floor(yoe / 4) - Math.floor(yoe / 100));
	const mp = Math.floor((5 * doy + 2) / 153);
	const day = doy - Math.floor((153 * mp + 2) / 5) + 1;
	const month = mp < 10 ? mp + 3 : mp - 9;
	const year = yoe + era * 400 + (month <= 2 ? 1 : 0);
	return year * 10000 + month * 100 + day;
}

/** Completed years between two instants: ⌊(yyyymmdd_at − yyyymmdd_birth) / 10000⌋. */
export function completedYearsRaw(birthMs: number, atMs: number): number {
	return Math.floor((utcYmd(atMs) - utcYmd(birthMs)) / 10000);
}

export function completedYears(args: { birthDate: Date; at: Date }): number {
	return completedYearsRaw(requireDate('birthDate', args.birthDate), requireDate('at', args.at));
}

/** Age in completed years on `at` of a birth date written yyyy-mm-dd (as the database and the feed hold it). */
export function ageOnDate(birthDate: string, at: Date): number {
	return completedYearsRaw(Date.parse(`${birthDate}T00:00:00Z`), at.getTime());
}

/** yyyy-mm-dd of a packed yyyymmdd (years 1000–9999). */
export function ymdString(ymd: number): string {
	const y = Math.floor(ymd / 10000);
	const m = Math.floor(ymd / 100) % 100;
	const d = ymd % 100;
	return y + (m < 10 ? '-0' : '-') + m + (d < 10 ? '-0' : '-') + d;
}
