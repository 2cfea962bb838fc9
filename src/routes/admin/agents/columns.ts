// The agent library table: features and columns, kept outside the component so the table's column
// model stays stable. Sorting and the text filter run in the browser (about twenty rows).
import {
	columnFilteringFeature,
	createColumnHelper,
	createFilteredRowModel,
	createSortedRowModel,
	filterFn_includesString,
	globalFilteringFeature,
	rowSortingFeature,
	sortFn_alphanumeric,
	sortFn_basic,
	tableFeatures
} from '@tanstack/svelte-table';

export const features = tableFeatures({
	rowSortingFeature,
	sortedRowModel: createSortedRowModel(),
	sortFns: { alphanumeric: sortFn_alphanumeric, basic: sortFn_basic },
	columnFilteringFeature,
	globalFilteringFeature,
	filteredRowModel: createFilteredRowModel(),
	filterFns: { includesString: filterFn_includesString }
});

export type AgentRow = {
	id: string;
	name: string;
	code: string;
	agentClass: string;
	synonyms: string;
	fe: number;
	proteinBinding: number;
	halfLifeNormalH: number;
	vdLPerKg: number;
	model: string;
	nephrotoxic: boolean;
	bands: number;
	provenance: [string, number][];
	activeOrders: number;
	active: boolean;
};

const helper = createColumnHelper<typeof features, AgentRow>();

export const columns = helper.columns([
	helper.accessor('name', { header: 'Agent', sortFn: 'alphanumeric' }),
	helper.accessor('agentClass', { header: 'Class', sortFn: 'alphanumeric' }),
	helper.accessor('fe', { header: 'fe', sortFn: 'basic', enableGlobalFilter: false }),
	helper.accessor('proteinBinding', { header: 'Protein binding', sortFn: 'basic', enableGlobalFilter: false }),
	helper.accessor('halfLifeNormalH', { header: 't½ normal', sortFn: 'basic', enableGlobalFilter: false }),
	helper.accessor('vdLPerKg', { header: 'Vd', sortFn: 'basic', enableGlobalFilter: false }),
	helper.accessor('model', { header: 'Model', sortFn: 'alphanumeric' }),
	helper.accessor('bands', { header: 'Renal bands', sortFn: 'basic', enableGlobalFilter: false }),
	helper.accessor('activeOrders', { header: 'Active orders', sortFn: 'basic', enableGlobalFilter: false }),
	helper.display({ id: 'provenance', header: 'Provenance' }),
	helper.display({ id: 'edit', header: 'Edit' }),
	// searchable but not shown: code and synonyms
	helper.accessor('code', { header: 'Code', enableSorting: false }),
	helper.accessor('synonyms', { header: 'Synonyms', enableSorting: false })
]);

export const HIDDEN = new Set(['code', 'synonyms']);

/** Source tags of the agent library (clinical-reference §2 and §5), plus the institution's own edits. */
export const TAG_MEANING: Record<string, string> = {
	P: 'primary source',
	S: 'secondary source',
	L: 'product label',
	Ls: 'label, secondary summary',
	M: 'from memory, not confirmed',
	CP: 'common practice',
	local: 'edited here'
};
