import { json } from '@sveltejs/kit';
import { requireRole } from '$lib/server/auth/access';
import { badRequest, readJsonBody } from '$lib/server/http';
import { logger } from '$lib/server/logger';
import { ruleSets as rules, backTest } from '$lib/server/rules';
import { backTestSchema } from '$lib/validation/rules';
import type { RequestHandler } from './$types';

/**
 * Runs a back-test of a saved rule version and streams its progress as newline-delimited JSON:
 * {"type":"progress","phase","done","total"} lines, then one {"type":"result",…} or {"type":"error",…}.
 * Nothing is written; closing the request stops the work.
 */
export const POST: RequestHandler = async ({ locals, request }) => {
	requireRole(locals, 'admin');
	const body = await readJsonBody(request);
	if (!body.ok) return body.response;
	const parsed = backTestSchema.safeParse(body.value ?? {});
	if (!parsed.success) return badRequest(parsed.error, 'Invalid back-test');
	const version = await rules.getVersion(parsed.data.versionId);
	if (!version) return json({ error: 'No rule version with that id.' }, { status: 404 });

	const controller = new AbortController();
	const encoder = new TextEncoder();
	const stream = new ReadableStream<Uint8Array>({
		async start(output) {
			const send = (line: unknown) => {
				if (!controller.signal.aborted) output.enqueue(encoder.encode(JSON.stringify(line) + '\n'));
			};
			try {
				let last = 0;
				const result = await backTest(
					{ id: version.id, version: version.version, rules: version.rules },
					{
						days: parsed.data.days,
						signal: controller.signal,
						onProgress: (p) => {
							// at most a few progress lines a second
							const t = Date.now();
							if (t - last >= 150 || p.done === p.total) {
								last = t;
								send({ type: 'progress', ...p });
							}
						}
					}
				);
				send({ type: 'result', version: version.version, result });
			} catch (error) {
				const message = error instanceof Error ? error.message : String(error);
				if (!controller.signal.aborted) logger.error('back-test failed', { requestId: locals.requestId, error: message });
				send({ type: 'error', message: controller.signal.aborted ? 'cancelled' : 'The back-test failed; the log has the details.' });
			}
			if (!controller.signal.aborted) output.close();
		},
		cancel() {
			controller.abort();
		}
	});
	return new Response(stream, { headers: { 'content-type': 'application/x-ndjson; charset=utf-8', 'cache-control': 'no-store' } });
};
