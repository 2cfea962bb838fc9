// The board's filters and sort read from its URL: the query the server's load and the browser both ask for.
import { describe, expect, it } from 'vitest';
import { boardHref, readBoardUrl } from '../../../src/lib/flags/board-url';

describe('readBoardUrl', () => {
	it('defaults to priority, most urgent first, unfiltered', () => {
		expect(readBoardUrl(new URLSearchParams())).toEqual({ sortKey: 'priority', sortDir: 'desc', filtered: false, filterQuery: 'sort=priority&dir=desc' });
	});

	it("takes a known sort with that column's default direction, and ignores an unknown one", () => {
		expect(readBoardUrl(new URLSearchParams('sort=patient'))).toMatchObject({ sortKey: 'patient', sortDir: 'asc' });
		expect(readBoardUrl(new URLSearchParams('sort=patient&dir=desc'))).toMatchObject({ sortKey: 'patient', sortDir: 'desc' });
		expect(readBoardUrl(new URLSearchParams('sort=shoe-size&dir=sideways'))).toMatchObject({ sortKey: 'priority', sortDir: 'desc' });
	});

	it('keeps the filters, in a fixed order, and nothing else the URL carries', () => {
		const state = readBoardUrl(new URLSearchParams('q=ash&sent=1&ward=ICU&mine=1&cursor=abc'));
		expect(state.filtered).toBe(true);
		expect(state.filterQuery).toBe('ward=ICU&mine=1&q=ash&sort=priority&dir=desc');
	});
});

describe('boardHref', () => {
	it('sets, replaces and removes parameters', () => {
		const params = new URLSearchParams('ward=ICU&q=ash');
		expect(boardHref(params, { q: null, sort: 'age' })).toBe('/board?ward=ICU&sort=age');
		expect(boardHref(params, { ward: '', q: '' })).toBe('/board');
		expect(params.toString()).toBe('ward=ICU&q=ash');
	});
});
