// The home page greeting: the name a person is addressed by and the time of day (common practice).
import { describe, expect, it } from 'vitest';
import { hourIn } from '../../src/lib/format';
import { addressName, greetingWord } from '../../src/lib/greeting';

describe('addressName', () => {
	it('keeps a title with the family name, never the title alone', () => {
		expect(addressName('Dr Anselm Okafor-Lind')).toBe('Dr Okafor-Lind');
		expect(addressName('Prof. Ada Quill')).toBe('Prof. Quill');
		expect(addressName('Dr')).toBe('Dr');
	});
	it('uses the first name when there is no title', () => {
		expect(addressName('Imogen Farrow')).toBe('Imogen');
		expect(addressName('  Tobias   Wren ')).toBe('Tobias');
		expect(addressName('')).toBe('there');
	});
});

describe('greetingWord', () => {
	it('follows the hour', () => {
		expect([4, 5, 11, 12, 17, 18, 23].map(greetingWord)).toEqual([
			'Good evening',
			'Good morning',
			'Good morning',
			'Good afternoon',
			'Good afternoon',
			'Good evening',
			'Good evening'
		]);
	});
	it('reads the hour in the hospital time zone', () => {
		const at = new Date('2026-06-01T23:30:00Z');
		expect(hourIn('UTC', at)).toBe(23);
		expect(hourIn('Europe/London', at)).toBe(0);
		expect(hourIn('America/Los_Angeles', at)).toBe(16);
	});
});
