// Dates and times print in the hospital's zone wherever they are rendered (the runtime's own zone is
// never assumed). 14 July 2026 is in British Summer Time (UTC+1); 10 March 2026 is not (GMT).
import { afterEach, describe, expect, it } from 'vitest';
import {
	dayIn,
	formatDateTime,
	formatDateTimeZoned,
	formatDay,
	formatDurationMs,
	formatLogTime,
	formatTimestamp,
	hospitalTimeZone,
	setHospitalTimeZone
} from '../../../src/lib/format';

const summer = new Date('2026-07-14T07:05:09Z');
const winter = new Date('2026-03-10T23:30:00Z');
const initialZone = hospitalTimeZone();

describe('dates in the hospital’s zone', () => {
	afterEach(() => setHospitalTimeZone(initialZone as string));

	it('prints the page, record, log and e-mail styles in the zone it is given', () => {
		expect(formatDateTime(summer, 'Europe/London')).toBe('Tue 14 Jul, 08:05');
		expect(formatTimestamp(summer, 'Europe/London')).toBe('14 Jul 2026, 08:05');
		expect(formatLogTime(summer, 'Europe/London')).toBe('14 Jul 2026, 08:05:09');
		expect(formatDateTimeZoned(summer, 'Europe/London')).toBe('14 Jul 2026, 08:05 BST');
		expect(formatDateTimeZoned(winter, 'Europe/London')).toBe('10 Mar 2026, 23:30 GMT');
	});

	it('uses the hospital zone once set, whatever the runtime’s zone', () => {
		setHospitalTimeZone('America/Los_Angeles');
		expect(formatDateTime(summer.toISOString())).toBe('Tue 14 Jul, 00:05');
		setHospitalTimeZone('Australia/Sydney');
		expect(formatDateTime(summer)).toBe('Tue 14 Jul, 17:05');
		expect(formatTimestamp(winter)).toBe('11 Mar 2026, 10:30');
	});

	it('reads the calendar day in the zone, and prints a calendar day without one', () => {
		expect(dayIn('Europe/London', winter)).toBe('2026-03-10');
		expect(dayIn('Asia/Tokyo', winter)).toBe('2026-03-11');
		expect(formatDay('2026-03-10')).toBe('10 March 2026');
		expect(formatDay('2026-03-10', 'short')).toBe('10 Mar');
	});

	it('says so when there is no time', () => {
		expect(formatDateTime(null)).toBe('—');
		expect(formatTimestamp(null)).toBe('');
	});
});

describe('durations', () => {
	it('print in the largest whole unit, rounded down, with the unit', () => {
		expect(formatDurationMs(0)).toBe('0 s');
		expect(formatDurationMs(-5_000)).toBe('0 s');
		expect(formatDurationMs(12_900)).toBe('12 s');
		expect(formatDurationMs(59_999)).toBe('59 s');
		expect(formatDurationMs(60_000)).toBe('1 min');
		expect(formatDurationMs(3 * 60_000 + 59_000)).toBe('3 min');
		expect(formatDurationMs(3_600_000)).toBe('1 h');
		expect(formatDurationMs(47 * 3_600_000)).toBe('47 h');
		expect(formatDurationMs(48 * 3_600_000)).toBe('2 d');
	});
});
