// The triage board's filters and sort live in the URL; read by the page's load on the server and by the
// board in the browser, so both ask for the same page.
import { BOARD_SORTS, DEFAULT_DIR, type BoardSort } from '../validation/flags';

export const BOARD_PAGE_SIZE = 50;
export const FILTER_KEYS = ['ward', 'severity', 'rule', 'agent', 'state', 'mine', 'q'] as const;

export type BoardUrlState = { sortKey: BoardSort; sortDir: 'asc' | 'desc'; filtered: boolean; filterQuery: string };

/** Sort, direction and the board query (filters, sort and dir, as the API takes them) from the page's search params. */
export function readBoardUrl(params: URLSearchParams): BoardUrlState {
	const s = params.get('sort');
	const sortKey: BoardSort = s && (BOARD_SORTS as readonly string[]).includes(s) ? (s as BoardSort) : 'priority';
	const dir = params.get('dir');
	const sortDir = dir === 'asc' || dir === 'desc' ? dir : DEFAULT_DIR[sortKey];
	const q = new URLSearchParams();
	for (const key of FILTER_KEYS) {
		const v = params.get(key);
		if (v) q.set(key, v);
	}
	q.set('sort', sortKey);
	q.set('dir', sortDir);
	return { sortKey, sortDir, filtered: FILTER_KEYS.some((k) => params.get(k)), filterQuery: q.toString() };
}

/** The board's address with `changes` applied to `params` (null or '' removes a parameter). */
export function boardHref(params: URLSearchParams, changes: Record<string, string | null>): string {
	const next = new URLSearchParams(params);
	for (const [key, value] of Object.entries(changes)) {
		if (value === null || value === '') next.delete(key);
		else next.set(key, value);
	}
	const search = next.toString();
	return `/board${search ? `?${search}` : ''}`;
}
