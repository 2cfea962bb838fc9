// Links and counts of a log page (the audit log, the access log): filters kept in the URL, paging by
// row id, and the count of matching rows (capped).

import { formatNumber } from '$lib/format';

type Filter = Record<string, string | undefined>;

/** Whether any filter is set. */
export const isFiltered = (filter: Filter) => Object.values(filter).some((v) => typeof v === 'string' && v !== '');

/** `path` with some filters changed and paging reset; `pageLink`: the same filters, one page on. */
export function logLinks(path: string, filter: Filter, exportQuery: string | null) {
	const withFilter = (changes: Record<string, string | null>) => {
		const params = new URLSearchParams(Object.entries(filter).filter((e): e is [string, string] => typeof e[1] === 'string' && e[1] !== ''));
		for (const [k, v] of Object.entries(changes)) {
			if (v === null) params.delete(k);
			else params.set(k, v);
		}
		const q = params.toString();
		return q ? `${path}?${q}` : path;
	};
	const pageLink = (cursor: 'before' | 'after', id: number) => {
		const params = new URLSearchParams(exportQuery ?? '');
		params.set(cursor, String(id));
		return `${path}?${params}`;
	};
	return { withFilter, pageLink };
}

/** "1,234" or "more than 10,000" ("More …" to start a sentence). */
export const matchCount = (page: { matching: number; matchingCapped: boolean }, capital = false) =>
	page.matchingCapped ? `${capital ? 'More' : 'more'} than ${formatNumber(page.matching)}` : formatNumber(page.matching);
