// Age in completed years by integer calendar arithmetic, checked against the JavaScript Date calendar (UTC).
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { completedYears, utcYmd, ymdString } from '../../../src/lib/clinical';

function viaDate(birth: Date, at: Date): number {
	let years = at.getUTCFullYear() - birth.getUTCFullYear();
	const months = at.getUTCMonth() - birth.getUTCMonth();
	if (months < 0 || (months === 0 && at.getUTCDate() < birth.getUTCDate())) years--;
	return years;
}

const instant = fc.integer({ min: Date.UTC(1900, 0, 1), max: Date.UTC(2100, 11, 31) });

describe('completed years (common practice: age on the last birthday)', () => {
	it('agrees with the Date calendar for any pair of instants 1900–2100', () => {
		fc.assert(
			fc.property(instant, instant, (a, b) => {
				const [birth, at] = a <= b ? [a, b] : [b, a];
				expect(completedYears({ birthDate: new Date(birth), at: new Date(at) })).toBe(viaDate(new Date(birth), new Date(at)));
			}),
			{ numRuns: 2000 }
		);
	});

	it('birthday edges, including 29 February', () => {
		const age = (b: string, a: string) => completedYears({ birthDate: new Date(b), at: new Date(a) });
		expect(age('1950-06-15T00:00:00Z', '2025-06-14T23:59:59Z')).toBe(74);
		expect(age('1950-06-15T00:00:00Z', '2025-06-15T00:00:00Z')).toBe(75);
		expect(age('2000-02-29T12:00:00Z', '2021-02-28T12:00:00Z')).toBe(20);
		expect(age('2000-02-29T12:00:00Z', '2021-03-01T00:00:00Z')).toBe(21);
	});

	it('packs and prints the UTC date', () => {
		fc.assert(
			fc.property(instant, (ms) => {
				expect(ymdString(utcYmd(ms))).toBe(new Date(ms).toISOString().slice(0, 10));
			}),
			{ numRuns: 2000 }
		);
	});
});
