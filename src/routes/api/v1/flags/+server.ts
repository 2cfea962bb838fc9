import { json } from '@sveltejs/kit';
import { requireRole } from '$lib/server/auth/access';
import { badRequest } from '$lib/server/http';
import { boardPageJson, flagQueries as board } from '$lib/server/flags';
import { boardQuerySchema } from '$lib/validation/flags';
import type { RequestHandler } from './$types';

/**
 * The triage board: GET /api/v1/flags?ward=&severity=high,moderate&rule=&agent=&state=open&mine=1&q=
 * &sort=priority&dir=desc&limit=50&cursor=…  With openedAfter=<ISO time> it answers only
 * { newCount } — how many matching flags opened since then (the board's "n new" notice).
 */
export const GET: RequestHandler = async ({ locals, url }) => {
	const user = requireRole(locals, 'pharmacist', 'admin');
	const parsed = boardQuerySchema.safeParse(Object.fromEntries(url.searchParams));
	if (!parsed.success) return badRequest(parsed.error, 'Invalid board query');
	const query = parsed.data;
	if (query.openedAfter) {
		const newCount = await board.countOpenedAfter(query, user.id, new Date(query.openedAfter));
		return json({ newCount, asOf: new Date().toISOString() });
	}
	try {
		return new Response(await boardPageJson(query, user.id), { headers: { 'content-type': 'application/json' } });
	} catch (error) {
		if (error instanceof board.BadCursorError) {
			return json({ error: `Invalid board query: cursor: ${error.message}`, issues: { cursor: error.message } }, { status: 400 });
		}
		throw error;
	}
};
