import { error, type RequestHandler } from '@sveltejs/kit';
import { requireRole } from '$lib/server/auth/access';
import { isCsvKind, templateCsv } from '$lib/server/feed';

/** A CSV template with every documented column and one example row. */
export const GET: RequestHandler = ({ locals, params }) => {
	requireRole(locals, 'pharmacist', 'admin');
	const kind = params.kind ?? '';
	if (!isCsvKind(kind)) error(404, 'There is a template for results, orders, administrations and levels only.');
	return new Response(templateCsv(kind), {
		headers: {
			'content-type': 'text/csv; charset=utf-8',
			'content-disposition': `attachment; filename="ebbline-${kind}-template.csv"`
		}
	});
};
