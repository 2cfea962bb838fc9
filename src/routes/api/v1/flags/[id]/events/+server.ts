import { json } from '@sveltejs/kit';
import { z } from 'zod';
import type { FlagAction } from '$lib/flags/lifecycle';
import { requireRole } from '$lib/server/auth/access';
import { act, flagQueries as board } from '$lib/server/flags';
import { badRequest, readJsonBody } from '$lib/server/http';
import { flagEventSchema, type FlagEventBody } from '$lib/validation/flags';
import type { RequestHandler } from './$types';

function toAction(body: FlagEventBody): FlagAction {
	switch (body.action) {
		case 'snooze':
			return { kind: 'snooze', until: body.until ? new Date(body.until) : null, untilNextResult: body.untilNextResult ?? false };
		case 'note':
			return { kind: 'note', note: body.note };
		case 'close':
			return { kind: 'close', outcome: body.outcome, reason: body.reason ?? null };
		default:
			return { kind: body.action };
	}
}

/**
 * One action on a flag: { action: claim | release | start_review | snooze | wake | note | close,
 * expectedVersion, … }. A flag changed since the client loaded it answers 409 with who changed it and
 * how, and nothing is overwritten. Recommendations are sent from the compose page, not here.
 */
export const POST: RequestHandler = async ({ locals, params, request }) => {
	const user = requireRole(locals, 'pharmacist', 'admin');
	if (!z.uuid().safeParse(params.id).success) {
		return json({ error: 'id: must be a flag id (UUID)', issues: { id: 'must be a flag id (UUID)' } }, { status: 400 });
	}
	const body = await readJsonBody(request);
	if (!body.ok) return body.response;
	const parsed = flagEventSchema.safeParse(body.value);
	if (!parsed.success) return badRequest(parsed.error, 'Invalid flag action');
	const result = await act(
		params.id,
		toAction(parsed.data),
		{ actorId: user.id, actorLabel: user.email, role: user.role, requestId: locals.requestId },
		{ expectedVersion: parsed.data.expectedVersion }
	);
	if (!result.ok) {
		return json({ error: result.error, ...(result.conflict ? { conflict: result.conflict } : {}) }, { status: result.status });
	}
	return json({ flag: await board.flagStatus(params.id, user) });
};
