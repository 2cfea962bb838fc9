import { error, redirect } from '@sveltejs/kit';
import { z } from 'zod';
import { requirePageRole } from '$lib/server/access';
import * as board from '$lib/server/flags/queries';
import type { PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url, params }) => {
	const user = requirePageRole(locals, url, 'pharmacist', 'admin');
	if (!z.uuid().safeParse(params.id).success) error(404, 'No flag with that id.');
	const flag = await board.getFlagDetail(params.id, user);
	if (!flag) {
		// a flag merged into its order's flag lives on as one of that flag's findings
		const holder = await board.flagIdOfFinding(params.id);
		if (holder) redirect(308, `/flags/${holder}`);
		error(404, 'No flag with that id.');
	}
	return { flag, me: { id: user.id } };
};
