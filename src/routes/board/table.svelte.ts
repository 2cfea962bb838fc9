// The board's table model (TanStack Table): sorting is the server's (the URL's), column visibility is the
// pharmacist's and kept in this browser.
import { createTable, type ColumnVisibilityState, type SortingState, type Updater } from '@tanstack/svelte-table';
import type { BoardRow } from '$lib/flags/board';
import { boardColumns, features, SPEC_BY_ID } from './columns';

const COLUMNS_STORAGE = 'ebbline.board.hiddenColumns';

const apply = <T>(updater: Updater<T>, current: T) => (typeof updater === 'function' ? (updater as (old: T) => T)(current) : updater);

export function createBoardTable(options: {
	rows: () => BoardRow[];
	now: () => number;
	sorting: () => SortingState;
	onSort: (sort: { id: string; desc: boolean }) => void;
}) {
	let columnVisibility: ColumnVisibilityState = $state({});
	const table = createTable({
		features,
		columns: boardColumns({
			get now() {
				return options.now();
			}
		}),
		get data() {
			return options.rows();
		},
		getRowId: (row) => row.id,
		manualSorting: true,
		enableSortingRemoval: false,
		enableMultiSort: false,
		state: {
			get sorting() {
				return options.sorting();
			},
			get columnVisibility() {
				return columnVisibility;
			}
		},
		onSortingChange: (updater: Updater<SortingState>) => {
			const first = apply(updater, options.sorting())[0];
			if (first) options.onSort(first);
		},
		onColumnVisibilityChange: (updater: Updater<ColumnVisibilityState>) => {
			columnVisibility = apply(updater, columnVisibility);
			const hidden = Object.entries(columnVisibility)
				.filter(([, v]) => v === false)
				.map(([k]) => k);
			localStorage.setItem(COLUMNS_STORAGE, JSON.stringify(hidden));
		}
	});

	/** The columns this browser hid last time (in the browser only). */
	function restoreHiddenColumns() {
		try {
			const hidden = JSON.parse(localStorage.getItem(COLUMNS_STORAGE) ?? '[]') as string[];
			columnVisibility = Object.fromEntries(hidden.filter((id) => SPEC_BY_ID[id]?.hideable).map((id) => [id, false]));
		} catch {
			// unreadable preference: show every column
		}
	}

	return { table, restoreHiddenColumns };
}

export type BoardTable = ReturnType<typeof createBoardTable>['table'];
