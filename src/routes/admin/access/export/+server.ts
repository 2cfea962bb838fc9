import { fileStamp } from '$lib/format';
import { error } from '@sveltejs/kit';
import { requireRole } from '$lib/server/auth/access';
import { accessLog, actor, record } from '$lib/server/audit';
import { BOM, csvLine, csvResponse, describeFieldErrors } from '$lib/server/http';
import type { RequestHandler } from './$types';

/** The filtered access log as CSV, newest first, streamed in batches so a long log never sits in memory. */
export const GET: RequestHandler = async ({ locals, url }) => {
	requireRole(locals, 'admin');
	const parsed = accessLog.parseQuery(url.searchParams);
	if (!parsed.ok) error(400, describeFieldErrors(parsed.errors));
	const filter = accessLog.filterOf(parsed.query);
	// A copy of who read what leaves the system: that is a change worth a line in the audit log.
	await record({ ...actor(locals), action: 'access_log.exported', objectType: 'access_log', after: { filter } });

	const batches = accessLog.exportRows(filter);
	const encoder = new TextEncoder();
	const stream = new ReadableStream<Uint8Array>({
		start(controller) {
			controller.enqueue(encoder.encode(BOM + csvLine(accessLog.EXPORT_COLUMNS)));
		},
		async pull(controller) {
			const next = await batches.next();
			if (next.done) {
				controller.close();
				return;
			}
			controller.enqueue(encoder.encode(next.value.map((row) => csvLine(accessLog.exportCells(row))).join('')));
		},
		async cancel() {
			await batches.return(undefined);
		}
	});
	const stamp = fileStamp();
	return csvResponse(stream, `ebbline-access-log-${stamp}.csv`);
};
