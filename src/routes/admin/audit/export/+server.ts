import { fileStamp } from '$lib/format';
import { error } from '@sveltejs/kit';
import { requireRole } from '$lib/server/auth/access';
import { actor, record, auditLog } from '$lib/server/audit';
import { BOM, csvLine, csvResponse, describeFieldErrors } from '$lib/server/http';
import type { RequestHandler } from './$types';

/** The filtered audit log as CSV, newest first, streamed in batches so a long log never sits in memory. */
export const GET: RequestHandler = async ({ locals, url }) => {
	requireRole(locals, 'admin');
	const parsed = auditLog.parseQuery(url.searchParams);
	if (!parsed.ok) error(400, describeFieldErrors(parsed.errors));
	const filter = auditLog.filterOf(parsed.query);
	// Taking a copy of the trail is itself worth a line in it.
	await record({ ...actor(locals), action: 'audit_log.exported', objectType: 'audit_log', after: { filter } });

	const batches = auditLog.exportRows(filter);
	const encoder = new TextEncoder();
	const stream = new ReadableStream<Uint8Array>({
		start(controller) {
			controller.enqueue(encoder.encode(BOM + csvLine(auditLog.EXPORT_COLUMNS)));
		},
		async pull(controller) {
			const next = await batches.next();
			if (next.done) {
				controller.close();
				return;
			}
			controller.enqueue(encoder.encode(next.value.map((row) => csvLine(auditLog.exportCells(row))).join('')));
		},
		async cancel() {
			await batches.return(undefined);
		}
	});
	const stamp = fileStamp();
	return csvResponse(stream, `ebbline-audit-log-${stamp}.csv`);
};
