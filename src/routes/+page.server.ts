import { requirePageRole } from '$lib/server/access';
import type { PageServerLoad } from './$types';

export const load: PageServerLoad = ({ locals, url }) => {
	const user = requirePageRole(locals, url, 'pharmacist', 'physician', 'admin');
	return { role: user.role, firstName: user.displayName.split(' ')[0] };
};
