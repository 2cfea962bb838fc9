import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { readAnswer } from '$lib/server/recommendations/answer-form';
import { failForm } from '$lib/server/http';
import * as recs from '$lib/server/recommendations';
import type { Actions, PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url }) => {
	const user = requirePageRole(locals, url, 'physician', 'admin');
	const rows = await recs.listFor(user);
	const view = rows.map((r) => ({
		id: r.id,
		status: r.status,
		statusLabel: r.statusLabel,
		...recs.letterOf(r),
		physicianName: r.physicianName,
		mine: r.physicianId === user.id,
		responded: r.respondedAt ? recs.formatDateTime(r.respondedAt) : null,
		respondedVia: r.respondedVia,
		responseRegimen: r.responseRegimen,
		responseReason: r.responseReason
	}));
	return {
		role: user.role,
		caution: recs.PROPOSAL_CAUTION,
		open: view.filter((r) => r.status === 'sent'),
		history: view.filter((r) => r.status !== 'sent')
	};
};

async function answerWith(kind: 'accept' | 'modify' | 'decline', { locals, request }: Parameters<Actions[string]>[0]) {
	const user = requireRole(locals, 'physician');
	const form = await readAnswer(request, kind);
	if (!form.ok) return form.failure;
	if (!form.id) return failForm(400, { form: 'Choose the recommendation to answer.' }, form.values);
	const result = await recs.answer({ via: 'app', id: form.id, user: { ...user, requestId: locals.requestId } }, form.answer);
	if (result.ok) return { answered: form.id, status: result.status };
	const messages = {
		invalid: 'That recommendation no longer exists.',
		not_yours: 'Only the physician it was sent to can answer this recommendation.',
		answered: 'This recommendation has already been answered.',
		withdrawn: 'The stewardship team has withdrawn this recommendation.',
		expired: 'This recommendation can no longer be answered.',
		revoked: 'This recommendation can no longer be answered.',
		unconfirmed: 'This recommendation can no longer be answered.'
	};
	return failForm(409, { form: messages[result.reason] }, { ...form.values, id: form.id });
}

export const actions: Actions = {
	accept: (event) => answerWith('accept', event),
	modify: (event) => answerWith('modify', event),
	decline: (event) => answerWith('decline', event)
};
