// The board's columns: id (= the API's sort key where sortable), header, width, whether the pharmacist
// may hide it, and how its cell renders. Kept outside the component so the table's column model stays stable.
import type { Snippet } from 'svelte';
import { columnVisibilityFeature, createColumnHelper, renderSnippet, rowSortingFeature, tableFeatures } from '@tanstack/svelte-table';
import * as cells from './cells.svelte';
import type { CellParams } from './cells.svelte';
import type { BoardRow } from '$lib/flags/board';
import { DEFAULT_DIR, type BoardSort } from '$lib/validation/flags';

export const features = tableFeatures({ rowSortingFeature, columnVisibilityFeature });

const helper = createColumnHelper<typeof features, BoardRow>();

type ColumnSpec = { id: string; header: string; width: string; sort?: BoardSort; hideable: boolean; numeric?: boolean };

export const COLUMN_SPECS: ColumnSpec[] = [
	{ id: 'priority', header: 'Priority', width: '5.4rem', sort: 'priority', hideable: false },
	{ id: 'patient', header: 'Patient', width: '10.2rem', sort: 'patient', hideable: false },
	{ id: 'mrn', header: 'MRN', width: '6.8rem', hideable: true },
	{ id: 'ward', header: 'Ward · bed', width: '6.8rem', sort: 'ward', hideable: true },
	{ id: 'agent', header: 'Agent · regimen', width: '12rem', sort: 'agent', hideable: false },
	{ id: 'crcl', header: 'CrCl start → now', width: '9.8rem', sort: 'crcl', hideable: true, numeric: true },
	{ id: 'albumin', header: 'Albumin', width: '4rem', hideable: true, numeric: true },
	{ id: 'halfLife', header: 't½ start → now', width: '6.8rem', sort: 'halfLife', hideable: true, numeric: true },
	{ id: 'finding', header: 'Finding', width: 'auto', hideable: false },
	{ id: 'age', header: 'Age', width: '3rem', sort: 'age', hideable: true, numeric: true },
	{ id: 'state', header: 'State · assignee', width: '6.4rem', sort: 'state', hideable: true }
];

export const SPEC_BY_ID = Object.fromEntries(COLUMN_SPECS.map((c) => [c.id, c]));

/** The value a column stands for (the server sorts; the table needs an accessor to offer sorting). */
const VALUES: Record<string, (r: BoardRow) => string | number | null> = {
	priority: (r) => r.priority,
	patient: (r) => `${r.patient.familyName}, ${r.patient.givenName}`,
	mrn: (r) => r.patient.mrn,
	ward: (r) => `${r.patient.ward ?? ''} ${r.patient.bed ?? ''}`,
	agent: (r) => r.order.agentName,
	crcl: (r) => r.crclNowMlMin,
	albumin: (r) => r.albuminGL,
	halfLife: (r) => r.halfLifeNowH,
	finding: (r) => r.finding,
	age: (r) => r.openedAt,
	state: (r) => r.state
};

/** Each column's cell. */
const CELLS: Record<string, Snippet<[CellParams]>> = {
	priority: cells.priorityCell,
	patient: cells.patientCell,
	mrn: cells.mrnCell,
	ward: cells.wardCell,
	agent: cells.agentCell,
	crcl: cells.crclCell,
	albumin: cells.albuminCell,
	halfLife: cells.halfLifeCell,
	finding: cells.findingCell,
	age: cells.ageCell,
	state: cells.stateCell
};

/** The column model; `clock.now` is the time ages are counted to (read as each cell renders). */
export const boardColumns = (clock: { readonly now: number }) =>
	helper.columns(
		COLUMN_SPECS.map((spec) =>
			helper.accessor(VALUES[spec.id], {
				id: spec.id,
				header: spec.header,
				enableSorting: spec.sort !== undefined,
				enableHiding: spec.hideable,
				sortDescFirst: spec.sort ? DEFAULT_DIR[spec.sort] === 'desc' : false,
				cell: (context) => renderSnippet(CELLS[spec.id], { row: context.row.original, now: clock.now })
			})
		)
	);
