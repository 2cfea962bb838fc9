// Dates and times as the hospital reads them: British English, in the hospital's time zone
// (EBBLINE_TIME_ZONE, read by src/lib/server/config.ts). The server sets the zone at start-up and the
// root layout hands it to the browser, so a page, an e-mail and an export print the same instant the
// same way wherever they are rendered. Pure: no framework imports.

const LOCALE = 'en-GB';
let hospitalZone: string | undefined;

/** The zone every formatter below uses unless told otherwise (undefined: the runtime's own). */
export function setHospitalTimeZone(timeZone: string): void {
	hospitalZone = timeZone;
}

export function hospitalTimeZone(): string | undefined {
	return hospitalZone;
}

const cache = new Map<string, Intl.DateTimeFormat>();
function formatter(style: string, options: Intl.DateTimeFormatOptions, timeZone: string | undefined, locale = LOCALE): Intl.DateTimeFormat {
	const key = `${style}|${timeZone ?? ''}|${locale}`;
	let f = cache.get(key);
	if (!f) cache.set(key, (f = new Intl.DateTimeFormat(locale, { ...options, timeZone })));
	return f;
}

type Instant = Date | string | number;
const toDate = (at: Instant) => (at instanceof Date ? at : new Date(at));

/** "Mon 14 Jul, 08:05": pages, where the day of the week matters more than the year. "—" when unknown. */
export function formatDateTime(at: Instant | null | undefined, timeZone = hospitalZone): string {
	if (at === null || at === undefined || at === '') return '—';
	return formatter('page', { weekday: 'short', day: 'numeric', month: 'short', hour: '2-digit', minute: '2-digit' }, timeZone).format(toDate(at));
}

/** "16 Feb 2026, 08:00 GMT": e-mails and records read away from the app, so the zone is named. */
export function formatDateTimeZoned(at: Instant, timeZone = hospitalZone): string {
	return formatter('zoned', { day: 'numeric', month: 'short', year: 'numeric', hour: '2-digit', minute: '2-digit', timeZoneName: 'short' }, timeZone).format(
		toDate(at)
	);
}

/** "14 Jul 2026, 08:05": lists of records (versions, tokens, quarantine, backups). "" when unknown. */
export function formatTimestamp(at: Instant | null | undefined, timeZone = hospitalZone): string {
	if (at === null || at === undefined || at === '') return '';
	return formatter('stamp', { dateStyle: 'medium', timeStyle: 'short' }, timeZone).format(toDate(at));
}

/** "14 Jul 2026, 08:05:09": the audit and access logs, to the second. */
export function formatLogTime(at: Instant, timeZone = hospitalZone): string {
	return formatter('log', { year: 'numeric', month: 'short', day: 'numeric', hour: '2-digit', minute: '2-digit', second: '2-digit' }, timeZone).format(
		toDate(at)
	);
}

/** The calendar day (yyyy-mm-dd) of an instant in the zone. */
export function dayIn(timeZone: string | undefined, at: Instant = new Date()): string {
	return formatter('day', { year: 'numeric', month: '2-digit', day: '2-digit' }, timeZone, 'en-CA').format(toDate(at));
}

/** The hour (0–23) of an instant in the zone. */
export function hourIn(timeZone: string | undefined, at: Instant = new Date()): number {
	return Number(formatter('hour', { hour: 'numeric', hourCycle: 'h23' }, timeZone).format(toDate(at)));
}

/** A calendar day (yyyy-mm-dd) in words: "14 July 2026", or "14 Jul" when short. A day has no zone. */
export function formatDay(day: string, length: 'long' | 'short' = 'long'): string {
	const options: Intl.DateTimeFormatOptions = length === 'long' ? { day: 'numeric', month: 'long', year: 'numeric' } : { day: 'numeric', month: 'short' };
	return formatter(`day-${length}`, options, 'UTC').format(new Date(`${day}T12:00:00Z`));
}

/** How long ago, compactly: "12 min", "5 h", "3 d". */
export function formatAge(from: Instant, now = Date.now()): string {
	const minutes = Math.max(0, (now - toDate(from).getTime()) / 60_000);
	if (minutes < 60) return `${Math.floor(minutes)} min`;
	if (minutes < 48 * 60) return `${Math.floor(minutes / 60)} h`;
	return `${Math.floor(minutes / 1440)} d`;
}

/** A duration, compactly and rounded down: "0 s", "12 s", "3 min", "5 h", "3 d". */
export function formatDurationMs(durationMs: number): string {
	const seconds = Math.max(0, Math.floor(durationMs / 1000));
	if (seconds < 60) return `${seconds} s`;
	if (seconds < 3600) return `${Math.floor(seconds / 60)} min`;
	if (seconds < 48 * 3600) return `${Math.floor(seconds / 3600)} h`;
	return `${Math.floor(seconds / 86_400)} d`;
}

/** "14 Jul": chart axes. */
export function formatDate(at: Instant, timeZone = hospitalZone): string {
	return formatter('date', { day: 'numeric', month: 'short' }, timeZone).format(toDate(at));
}

/** "2026-07-14T0705": a UTC minute for download file names (ISO 8601 basic time, no colon for file systems). */
export function fileStamp(at: Instant = new Date()): string {
	return toDate(at).toISOString().slice(0, 16).replace(':', '');
}
