// The board's rows in the browser: the first page from the page's load, then pages, refreshes and
// filter changes fetched from GET /api/v1/flags, and a poll that counts new flags without moving rows.
import { BOARD_PAGE_SIZE } from '$lib/flags/board-url';
import type { BoardFacets, BoardPage, BoardRow } from '$lib/flags/board';

export const POLL_MS = 30_000;

export type FirstPage = { query: string; board: BoardPage | null; error: string | null };

export class BoardData {
	status: 'loading' | 'ready' | 'error' = $state('loading');
	error = $state('');
	board: BoardPage | null = $state(null);
	rows: BoardRow[] = $state([]);
	facets: BoardFacets | null = $state(null);
	/** cursor of each page visited; the last is the current one */
	cursors: (string | null)[] = $state([null]);
	newCount = $state(0);
	/** when the rows were read (ages are counted from it) */
	now = $state(Date.now());
	/** the board query (filters and sort) the rows answer */
	query = '';
	private asOf: string | null = null;
	private request = 0;

	constructor(first: FirstPage) {
		this.query = first.query;
		if (first.board) this.take(first.board);
		else {
			this.error = first.error ?? 'the board could not be read';
			this.status = 'error';
		}
	}

	get firstRowNumber() {
		return (this.cursors.length - 1) * BOARD_PAGE_SIZE + 1;
	}

	private take(result: BoardPage) {
		if (result.facets) this.facets = result.facets;
		this.board = result.total >= 0 || !this.board ? result : { ...result, total: this.board.total };
		this.rows = result.rows;
		this.asOf = result.asOf;
		this.now = Date.now();
		this.newCount = 0;
		this.status = 'ready';
	}

	/**
	 * Reads the first page of `query`, or with keepPage the page on screen again. Resolves true when the
	 * rows on screen are this answer's (false when it failed or a later request overtook it).
	 */
	async load(query: string, options: { keepPage?: boolean } = {}): Promise<boolean> {
		const mine = ++this.request;
		this.query = query;
		const params = new URLSearchParams(query);
		params.set('limit', String(BOARD_PAGE_SIZE));
		const cursor = options.keepPage ? this.cursors.at(-1) : null;
		if (!options.keepPage) this.cursors = [null];
		if (cursor) params.set('cursor', cursor);
		if (!this.facets) params.set('facets', '1');
		if (!options.keepPage || this.status === 'error') this.status = 'loading';
		try {
			const response = await fetch(`/api/v1/flags?${params}`);
			const body = await response.json().catch(() => null);
			if (mine !== this.request) return false;
			if (!response.ok) throw new Error(body?.error ?? `the server answered ${response.status}`);
			this.take(body as BoardPage);
			return true;
		} catch (error) {
			if (mine !== this.request) return false;
			this.error = error instanceof Error ? error.message : String(error);
			// the rows on screen no longer answer the filters asked for
			this.rows = [];
			this.status = 'error';
			return false;
		}
	}

	/** Counts the flags opened since the rows were read; the rows stay where they are. */
	async poll() {
		if (!this.asOf || document.hidden || this.status !== 'ready') return;
		const params = new URLSearchParams(this.query);
		params.set('openedAfter', this.asOf);
		try {
			const response = await fetch(`/api/v1/flags?${params}`);
			if (!response.ok) return;
			const body = await response.json();
			this.newCount = body.newCount;
			this.now = Date.now();
		} catch {
			// a missed poll is retried in 30 s; the board itself stays usable
		}
	}

	nextPage(): boolean {
		if (!this.board?.nextCursor) return false;
		this.cursors = [...this.cursors, this.board.nextCursor];
		return true;
	}

	previousPage(): boolean {
		if (this.cursors.length < 2) return false;
		this.cursors = this.cursors.slice(0, -1);
		return true;
	}
}
