import { json } from '@sveltejs/kit';
import { sql } from 'drizzle-orm';
import { getDb } from '$lib/server/db';
import { isDatabaseUnavailable } from '$lib/server/db/errors';
import type { RequestHandler } from './$types';

/** Liveness and database reachability for load balancers; reveals nothing else. */
export const GET: RequestHandler = async () => {
	try {
		await getDb().execute(sql`select 1`);
		return json({ status: 'ok' });
	} catch (error) {
		if (isDatabaseUnavailable(error)) return json({ status: 'database unavailable' }, { status: 503 });
		throw error;
	}
};
