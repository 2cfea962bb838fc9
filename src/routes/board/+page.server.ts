import { requirePageRole } from '$lib/server/auth/access';
import { boardPage } from '$lib/server/flags';
import { BOARD_PAGE_SIZE, readBoardUrl } from '$lib/flags/board-url';
import { boardQuerySchema } from '$lib/validation/flags';
import type { PageServerLoad } from './$types';

// The first page of rows for the filters and sort in the URL, through the same query (and cache) as
// GET /api/v1/flags, so the board paints with its rows. Later pages, refreshes and filter changes are
// fetched by the board itself from the API: the search params are read untracked, so changing a filter
// in the browser does not run this load again.
export const load: PageServerLoad = async ({ locals, url, untrack }) => {
	const user = untrack(() => requirePageRole(locals, url, 'pharmacist', 'admin'));
	const me = { id: user.id, name: user.displayName };
	const { filterQuery } = untrack(() => readBoardUrl(url.searchParams));
	const parsed = boardQuerySchema.safeParse({ ...Object.fromEntries(new URLSearchParams(filterQuery)), limit: String(BOARD_PAGE_SIZE), facets: '1' });
	if (!parsed.success) {
		const issues = parsed.error.issues.map((i) => `${i.path.join('.')}: ${i.message}`).join('; ');
		return { me, query: filterQuery, board: null, error: `Invalid board query: ${issues}` };
	}
	return { me, query: filterQuery, board: await boardPage(parsed.data, user.id), error: null };
};
