import { error, redirect } from '@sveltejs/kit';
import { accessLog } from '$lib/server/audit';
import { withdrawalNotice } from '$lib/server/recommendations';
import { readAnswer } from '$lib/server/recommendations/answer-form';
import { failForm } from '$lib/server/http';
import { offerAccountSetup, SETUP_LINK_LIFETIME_H } from '$lib/server/auth';
import * as recs from '$lib/server/recommendations';
import type { Actions, PageServerLoad } from './$types';

// Public: the physician needs no account. The token in the path is the only key; nothing about the
// patient is shown unless it matches an open, unexpired recommendation.
const NOT_VALID =
	'It may have been copied incompletely or changed on the way. Nothing has been recorded. Open the link from the e-mail again, or ask the stewardship team.';
const EXPIRED = 'This link has expired. Nothing has been recorded. Sign in to Ebbline to answer under My recommendations, or contact the stewardship team.';
const WITHDRAWN = 'The stewardship team has withdrawn this recommendation. Nothing needs to be done.';

export const load: PageServerLoad = async ({ locals, params, setHeaders, url }) => {
	setHeaders({ 'cache-control': 'no-store', 'x-robots-tag': 'noindex' });
	const found = await recs.findByToken(params.token);
	switch (found.state) {
		case 'invalid':
			return error(404, NOT_VALID);
		case 'expired':
			return error(410, EXPIRED);
		case 'withdrawn':
			return error(410, (await withdrawalNotice(params.token)) ?? WITHDRAWN);
		case 'answered': {
			const a = found.answer;
			return {
				state: 'answered' as const,
				justAnswered: url.searchParams.has('answered'),
				canSetUpAccount: found.canSetUpAccount,
				setupLinkLifetimeH: SETUP_LINK_LIFETIME_H,
				answer: { ...a, respondedAt: a.respondedAt ? recs.formatDateTime(a.respondedAt) : null }
			};
		}
		case 'open': {
			const r = found.recommendation;
			await accessLog.recordRead(locals, { kind: 'answer_link', objectId: r.id, patientOfFlag: r.flagId, route: '/respond/[token]' });
			return {
				state: 'open' as const,
				caution: recs.PROPOSAL_CAUTION,
				rec: { ...recs.letterOf(r), expires: recs.formatDateTime(r.expiresAt) }
			};
		}
	}
};

async function answerWith(kind: 'accept' | 'modify' | 'decline', { params, request, locals }: Parameters<Actions[string]>[0]) {
	const form = await readAnswer(request, kind);
	if (!form.ok) return form.failure;
	const result = await recs.answer({ via: 'link', token: params.token ?? '', requestId: locals.requestId }, form.answer);
	if (result.ok) redirect(303, `/respond/${params.token}?answered`);
	if (result.reason === 'answered') redirect(303, `/respond/${params.token}`);
	if (result.reason === 'expired') error(410, EXPIRED);
	if (result.reason === 'withdrawn') error(410, (await withdrawalNotice(params.token ?? '')) ?? WITHDRAWN);
	if (result.reason === 'invalid') error(404, NOT_VALID);
	return failForm(403, { form: 'This recommendation cannot be answered here.' });
}

export const actions: Actions = {
	accept: (event) => answerWith('accept', event),
	modify: (event) => answerWith('modify', event),
	decline: (event) => answerWith('decline', event),
	/** after answering without an account: send a single-use set-up link to the address the recommendation went to */
	setup: async ({ params, locals }) => {
		const offer = await offerAccountSetup(params.token ?? '', locals.requestId);
		if (offer.ok) return { setupSentTo: offer.email };
		if (offer.reason === 'invalid') error(404, NOT_VALID);
		return failForm(409, {
			form:
				offer.reason === 'has_account'
					? 'An Ebbline account with this e-mail already exists: sign in to see your recommendations.'
					: 'Answer the recommendation first.'
		});
	}
};
