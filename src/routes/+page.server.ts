import { hourIn } from '$lib/format';
import { addressName, greetingWord } from '$lib/greeting';
import { requirePageRole } from '$lib/server/auth/access';
import { config } from '$lib/server/config';
import * as recommendations from '$lib/server/recommendations';
import { openCounts } from '$lib/server/flags';
import { feedLag } from '$lib/server/ops';
import type { PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url }) => {
	const user = requirePageRole(locals, url, 'pharmacist', 'physician', 'admin');
	const openRecommendations = user.role === 'physician' ? await recommendations.openCountFor(user) : 0;
	const openFlags = user.role === 'pharmacist' ? await openCounts() : null;
	const lag = user.role === 'admin' ? await feedLag() : null;
	return {
		role: user.role,
		greeting: `${greetingWord(hourIn(config.hospitalTimeZone))}, ${addressName(user.displayName)}`,
		openRecommendations,
		openFlags,
		lag
	};
};
