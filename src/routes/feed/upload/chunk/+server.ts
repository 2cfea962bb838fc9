import { json, type RequestHandler } from '@sveltejs/kit';
import { requireRole } from '$lib/server/auth/access';
import { actor } from '$lib/server/audit';
import { checkHeader, normaliseHeader, unitWarnings, ingestCsvRows } from '$lib/server/feed';
import { badRequest, readJsonBody } from '$lib/server/http';
import { csvChunkSchema } from '$lib/validation/feed';

const MODES = { validate: 'dry-run', 'valid-rows': 'commit', 'all-or-nothing': 'all-or-nothing' } as const;

/**
 * One chunk of a CSV upload from /feed/upload: checked against the database without storing
 * (validate), stored with bad rows quarantined (valid-rows), or stored only when every row is valid
 * (all-or-nothing). Answers the counts and an error per bad row: line, column and reason.
 */
export const POST: RequestHandler = async ({ request, locals }) => {
	const user = requireRole(locals, 'pharmacist', 'admin');
	const body = await readJsonBody(request);
	if (!body.ok) return body.response;
	const parsed = csvChunkSchema.safeParse(body.value);
	if (!parsed.success) return badRequest(parsed.error, 'Invalid upload');
	const { kind, mode, rows } = parsed.data;
	const header = parsed.data.header.map(normaliseHeader);
	const { missing } = checkHeader(kind, header);
	if (missing.length > 0) {
		return json(
			{
				error: `The file is missing ${missing.length === 1 ? 'a required column' : 'required columns'}: ${missing.join(', ')}. Download the template to see every column.`,
				issues: Object.fromEntries(missing.map((m) => [m, 'missing column']))
			},
			{ status: 400 }
		);
	}
	const normalisedRows = rows.map((r) => ({
		line: r.line,
		values: Object.fromEntries(Object.entries(r.values).map(([k, v]) => [normaliseHeader(k), v]))
	}));
	const result = await ingestCsvRows(kind, header, normalisedRows, {
		source: 'csv',
		uploadedBy: user.id,
		actor: actor(locals),
		mode: MODES[mode]
	});
	return json({
		stored: result.stored,
		duplicateMessage: result.duplicateMessage,
		counts: result.counts,
		ordersQueued: result.ordersQueued,
		warnings: unitWarnings(kind, normalisedRows),
		errors: result.entries.filter((e) => e.outcome === 'quarantined').map((e) => ({ line: e.index, column: e.field ?? '', reason: e.reason ?? '' }))
	});
};
