import { requirePageRole } from '$lib/server/access';
import * as recommendations from '$lib/server/recommendations';
import type { PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url }) => {
	const user = requirePageRole(locals, url, 'pharmacist', 'physician', 'admin');
	const openRecommendations = user.role === 'physician' ? await recommendations.openCountFor(user.id) : 0;
	return { role: user.role, firstName: user.displayName.split(' ')[0], openRecommendations };
};
