import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { requireRole } from '$lib/server/auth/access';
import { badRequest } from '$lib/server/http';
import { ruleSets as rules } from '$lib/server/rules';
import type { RequestHandler } from './$types';

const idSchema = z.object({ id: z.uuid('Unknown replay.') });

/** State of a `rules.replay` job started by a publish, roll back or agent edit. */
export const GET: RequestHandler = async ({ locals, params }) => {
	requireRole(locals, 'admin');
	const parsed = idSchema.safeParse(params);
	if (!parsed.success) return badRequest(parsed.error, 'Invalid replay id');
	const status = await rules.replayStatus(parsed.data.id);
	if (!status) return json({ error: 'No replay with that id.' }, { status: 404 });
	return json(status, { headers: { 'cache-control': 'no-store' } });
};
