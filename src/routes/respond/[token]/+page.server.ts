import { error, redirect, type Cookies } from '@sveltejs/kit';
import { accessLog } from '$lib/server/audit';
import { withdrawalNotice, linkAccess, type LinkAccess } from '$lib/server/recommendations';
import { readAnswer } from '$lib/server/recommendations/answer-form';
import { failForm } from '$lib/server/http';
import { offerAccountSetup, SETUP_LINK_LIFETIME_H } from '$lib/server/auth';
import * as recs from '$lib/server/recommendations';
import type { Actions, PageServerLoad } from './$types';

// Public: the physician needs no account. The token in the path is the first key: it opens the proposal
// without the patient, and only for an open, unexpired recommendation. The second key is a code e-mailed
// to the address the recommendation went to (or the physician's own sign-in): it shows the patient and
// lets the holder answer (link-access.ts).
const NOT_VALID =
	'It may have been copied incompletely or changed on the way. Nothing has been recorded. Open the link from the e-mail again, or ask the stewardship team.';
const EXPIRED = 'This link has expired. Nothing has been recorded. Sign in to Ebbline to answer under My recommendations, or contact the stewardship team.';
const WITHDRAWN = 'The stewardship team has withdrawn this recommendation. Nothing needs to be done.';
const REVOKED = 'This link has been switched off. Nothing has been recorded. If you still need to answer, contact the stewardship team.';
const ROUTE = '/respond/[token]';

function accessOf(cookies: Cookies, locals: App.Locals): LinkAccess {
	return { confirmation: cookies.get(linkAccess.CONFIRMATION_COOKIE) ?? null, user: locals.user ?? null };
}

/** The link can no longer be used: the same plain page whatever the reason, naming nothing about the patient. */
async function closed(reason: 'invalid' | 'expired' | 'withdrawn' | 'revoked', token: string): Promise<never> {
	if (reason === 'invalid') error(404, NOT_VALID);
	if (reason === 'expired') error(410, EXPIRED);
	if (reason === 'revoked') error(410, REVOKED);
	error(410, (await withdrawalNotice(token)) ?? WITHDRAWN);
}

export const load: PageServerLoad = async ({ locals, params, setHeaders, url, cookies }) => {
	setHeaders({ 'cache-control': 'no-store', 'x-robots-tag': 'noindex' });
	const found = await recs.findByToken(params.token, accessOf(cookies, locals));
	switch (found.state) {
		case 'invalid':
		case 'expired':
		case 'withdrawn':
		case 'revoked':
			return closed(found.state, params.token);
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
			if (!found.confirmed) {
				// the proposal without the patient: on record all the same, marked as such
				await accessLog.recordRead(locals, {
					kind: 'answer_link',
					objectId: found.ids.id,
					patientOfFlag: found.ids.flagId,
					route: `${ROUTE} (before confirmation)`
				});
				const p = found.preview;
				return {
					state: 'confirm' as const,
					caution: recs.PROPOSAL_CAUTION,
					codeLifetimeMin: linkAccess.CODE_LIFETIME_MIN,
					preview: {
						agentName: p.agentName,
						current: p.current,
						proposed: p.proposed,
						keyNumberRows: p.keyNumberRows,
						cautions: p.cautions,
						expires: recs.formatDateTime(p.expiresAt)
					}
				};
			}
			const r = found.recommendation;
			await accessLog.recordRead(locals, { kind: 'answer_link', objectId: r.id, patientOfFlag: r.flagId, route: ROUTE });
			return {
				state: 'open' as const,
				caution: recs.PROPOSAL_CAUTION,
				rec: { ...recs.letterOf(r), cautions: r.cautions, expires: recs.formatDateTime(r.expiresAt) }
			};
		}
	}
};

async function answerWith(kind: 'accept' | 'modify' | 'decline', { params, request, locals, cookies }: Parameters<Actions[string]>[0]) {
	const form = await readAnswer(request, kind);
	if (!form.ok) return form.failure;
	const token = params.token ?? '';
	const result = await recs.answer({ via: 'link', token, access: accessOf(cookies, locals), requestId: locals.requestId }, form.answer);
	if (result.ok) {
		cookies.delete(linkAccess.CONFIRMATION_COOKIE, { path: `/respond/${token}` });
		redirect(303, `/respond/${token}?answered`);
	}
	if (result.reason === 'answered') redirect(303, `/respond/${token}`);
	if (result.reason === 'unconfirmed')
		return failForm(403, { form: 'Your confirmation has run out. Ask for a new code to answer: nothing has been recorded.' });
	if (result.reason === 'not_yours') return failForm(403, { form: 'This recommendation cannot be answered here.' });
	return closed(result.reason, token);
}

export const actions: Actions = {
	/** e-mails a 6-digit code to the address the recommendation went to (never one typed here) */
	code: async ({ params }) => {
		const sent = await linkAccess.requestCode(params.token ?? '');
		if (sent.ok) return { codeSentTo: sent.sentTo };
		if (sent.reason === 'too_soon')
			return failForm(429, { code: 'A code was sent less than a minute ago. Check your inbox, or ask again in a minute.' }, { sent: 'yes' });
		if (sent.reason === 'too_many')
			return failForm(429, { code: 'Too many codes were asked for this hour. Try again later, or contact the stewardship team.' }, { sent: 'yes' });
		if (sent.reason === 'answered') redirect(303, `/respond/${params.token}`);
		return closed(sent.reason, params.token ?? '');
	},
	confirm: async ({ params, request, locals, cookies, url }) => {
		const token = params.token ?? '';
		const given = String((await request.formData()).get('code') ?? '');
		if (!given.trim()) return failForm(400, { code: 'Enter the 6-digit code from the e-mail.' }, { sent: 'yes' });
		const checked = await linkAccess.confirmCode(token, given);
		if (checked.ok) {
			await accessLog.recordRead(locals, {
				kind: 'answer_link',
				objectId: checked.recommendationId,
				patientOfFlag: checked.flagId,
				route: `${ROUTE}?/confirm`
			});
			cookies.set(linkAccess.CONFIRMATION_COOKIE, checked.confirmation, {
				path: `/respond/${token}`,
				httpOnly: true,
				sameSite: 'lax',
				secure: url.protocol === 'https:',
				expires: checked.until
			});
			redirect(303, `/respond/${token}`);
		}
		if (checked.recommendationId && checked.flagId)
			await accessLog.recordRead(locals, {
				kind: 'answer_link',
				objectId: checked.recommendationId,
				patientOfFlag: checked.flagId,
				route: `${ROUTE}?/confirm`,
				status: 403
			});
		switch (checked.reason) {
			case 'wrong':
				return failForm(
					400,
					{
						code: checked.attemptsLeft
							? `That code is not right. ${checked.attemptsLeft} ${checked.attemptsLeft === 1 ? 'try' : 'tries'} left.`
							: 'That code is not right, and it is now used up. Ask for a new code.'
					},
					{ sent: checked.attemptsLeft ? 'yes' : '' }
				);
			case 'code_expired':
				return failForm(400, { code: `The code has expired (it works for ${linkAccess.CODE_LIFETIME_MIN} minutes). Ask for a new code.` });
			case 'no_code':
				return failForm(400, { code: 'There is no code waiting for this link. Ask for a new code.' });
			case 'answered':
				redirect(303, `/respond/${token}`);
				break;
			default:
				return closed(checked.reason, token);
		}
	},
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
