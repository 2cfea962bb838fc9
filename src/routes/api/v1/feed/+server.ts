import { formatNumber } from '$lib/format';
import { json, type RequestHandler } from '@sveltejs/kit';
import { badRequest, jsonBodyProblem } from '$lib/server/http';
import { bundleSchema, ingestBundle, MAX_FEED_BYTES } from '$lib/server/feed';

const ACCEPTED_TYPES = ['application/fhir+json', 'application/json'];

const problem = (status: number, error: string, issues: Record<string, string>) => json({ error, issues }, { status });

function tooLarge(bytes: number | null) {
	const size = bytes === null ? 'The body' : `The body (${formatNumber(bytes)} bytes)`;
	return problem(413, `${size} exceeds the feed limit of 2 MB (${formatNumber(MAX_FEED_BYTES)} bytes). Split the bundle into smaller messages.`, {
		body: 'too large'
	});
}

/** Reads the body up to the limit, so an oversized or lying client never fills memory. */
async function readLimited(request: Request): Promise<string | 'too-large'> {
	if (!request.body) return '';
	const reader = request.body.getReader();
	const chunks: Uint8Array[] = [];
	let total = 0;
	for (;;) {
		const { done, value } = await reader.read();
		if (done) break;
		total += value.byteLength;
		if (total > MAX_FEED_BYTES) {
			await reader.cancel().catch(() => {});
			return 'too-large';
		}
		chunks.push(value);
	}
	return Buffer.concat(chunks).toString('utf8');
}

/**
 * FHIR R4 Bundle intake for machine clients with a feed bearer token (never a browser session).
 * 202 with an outcome per entry (accepted, duplicate, quarantined + reason); 400 when the message
 * itself is not a Bundle Ebbline accepts; 413 over 2 MB; 415 for another content type.
 */
export const POST: RequestHandler = async ({ request, locals }) => {
	const token = locals.feedToken;
	if (!token) return problem(401, 'Unauthorised: send a valid feed token as "Authorization: Bearer <token>".', { authorization: 'missing or revoked token' });
	const type = (request.headers.get('content-type') ?? '').split(';')[0].trim().toLowerCase();
	if (!ACCEPTED_TYPES.includes(type)) {
		return problem(415, `Content-Type must be application/fhir+json (got ${type || 'none'}).`, { 'content-type': 'not application/fhir+json' });
	}
	const declared = Number(request.headers.get('content-length'));
	if (Number.isFinite(declared) && declared > MAX_FEED_BYTES) return tooLarge(declared);
	let text: string | 'too-large';
	try {
		text = await readLimited(request);
	} catch (error) {
		// the server's own body limit (BODY_SIZE_LIMIT) may be lower than the feed's
		if ((error as { status?: number })?.status === 413) return tooLarge(null);
		throw error;
	}
	if (text === 'too-large') return tooLarge(null);
	if (text.trim() === '') return problem(400, 'The body is empty: send a FHIR R4 Bundle as JSON.', { body: 'empty' });
	const unfit = jsonBodyProblem(text);
	if (unfit) return problem(400, `The body ${unfit}.`, { body: unfit });
	let parsed: unknown;
	try {
		parsed = JSON.parse(text);
	} catch (error) {
		return problem(400, `Malformed JSON: ${(error as Error).message}.`, { body: 'malformed JSON' });
	}
	const envelope = bundleSchema.safeParse(parsed);
	if (!envelope.success) return badRequest(envelope.error, 'Not a FHIR R4 Bundle Ebbline accepts');
	const result = await ingestBundle(text, envelope.data, {
		source: 'fhir',
		tokenId: token.id,
		actor: { actorId: null, actorLabel: `feed token ${token.name}`, requestId: locals.requestId }
	});
	return json(
		{
			messageId: result.messageId,
			duplicateMessage: result.duplicateMessage,
			receivedAt: result.receivedAt,
			counts: result.counts,
			ordersQueued: result.ordersQueued,
			entries: result.entries
		},
		{ status: 202 }
	);
};
