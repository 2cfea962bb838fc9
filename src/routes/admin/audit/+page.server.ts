import { requirePageRole } from '$lib/server/auth/access';
import { auditLog } from '$lib/server/audit';
import { config } from '$lib/server/config';
import type { PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url }) => {
	requirePageRole(locals, url, 'admin');
	const timeZone = config.hospitalTimeZone;
	const [actions, objectTypes] = await Promise.all([auditLog.listActions(), auditLog.listObjectTypes()]);
	const parsed = auditLog.parseQuery(url.searchParams);
	if (!parsed.ok) {
		return { timeZone, actions, objectTypes, filter: parsed.values, errors: parsed.errors, page: null, exportQuery: null };
	}
	const filter = auditLog.filterOf(parsed.query);
	const page = await auditLog.search(filter, { before: parsed.query.before, after: parsed.query.after });
	const exportQuery = new URLSearchParams(Object.entries(filter).filter((e): e is [string, string] => typeof e[1] === 'string')).toString();
	return { timeZone, actions, objectTypes, filter: filter as Record<string, string>, errors: {} as Record<string, string>, page, exportQuery };
};
