import { requirePageRole } from '$lib/server/auth/access';
import { CSV_CHUNK_ROWS, CSV_COLUMNS, CSV_MAX_ROWS } from '$lib/server/feed';
import type { PageServerLoad } from './$types';

export const load: PageServerLoad = ({ locals, url }) => {
	const user = requirePageRole(locals, url, 'pharmacist', 'admin');
	return { columns: CSV_COLUMNS, chunkRows: CSV_CHUNK_ROWS, maxRows: CSV_MAX_ROWS, isAdmin: user.role === 'admin' };
};
