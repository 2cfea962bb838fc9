import { requirePageRole } from '$lib/server/auth/access';
import type { PageServerLoad } from './$types';

// The board fetches its rows in the browser from /api/v1/flags (filters live in the URL).
export const load: PageServerLoad = ({ locals, url }) => {
	const user = requirePageRole(locals, url, 'pharmacist', 'admin');
	return { me: { id: user.id, name: user.displayName } };
};
