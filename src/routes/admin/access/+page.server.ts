import { requirePageRole } from '$lib/server/auth/access';
import { accessLog } from '$lib/server/audit';
import { config } from '$lib/server/config';
import { ACCESS_KIND_LABELS, ACCESS_KINDS } from '$lib/validation/access-log';
import type { PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url }) => {
	requirePageRole(locals, url, 'admin');
	const timeZone = config.hospitalTimeZone;
	const kinds = ACCESS_KINDS.map((value) => ({ value, label: ACCESS_KIND_LABELS[value] }));
	const parsed = accessLog.parseQuery(url.searchParams);
	if (!parsed.ok) return { timeZone, kinds, filter: parsed.values, errors: parsed.errors, page: null, exportQuery: null };
	const filter = accessLog.filterOf(parsed.query);
	const page = await accessLog.search(filter, { before: parsed.query.before, after: parsed.query.after });
	const exportQuery = new URLSearchParams(Object.entries(filter).filter((e): e is [string, string] => typeof e[1] === 'string')).toString();
	return { timeZone, kinds, filter: filter as Record<string, string>, errors: {} as Record<string, string>, page, exportQuery };
};
