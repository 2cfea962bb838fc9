import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { requireRole } from '$lib/server/access';
import * as board from '$lib/server/flags/queries';
import type { RequestHandler } from './$types';

/** One flag: finding, facts, the full trace of its assessment, proposed regimen, events, version, actions. */
export const GET: RequestHandler = async ({ locals, params }) => {
	const user = requireRole(locals, 'pharmacist', 'admin');
	if (!z.uuid().safeParse(params.id).success) {
		return json({ error: 'id: must be a flag id (UUID)', issues: { id: 'must be a flag id (UUID)' } }, { status: 400 });
	}
	const flag = await board.getFlagDetail(params.id, user);
	if (!flag) return json({ error: 'No flag with that id.' }, { status: 404 });
	return json(flag);
};
