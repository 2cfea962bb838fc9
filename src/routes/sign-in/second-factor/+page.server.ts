import { redirect } from '@sveltejs/kit';
import { deleteChallengeCookie, readChallengeCookie, secondFactor, sessions as session, users } from '$lib/server/auth';
import { failForm, parseForm } from '$lib/server/http';
import { safeNext, secondFactorCodeSchema } from '$lib/validation/users';
import type { Actions, PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url, cookies }) => {
	const next = safeNext(url.searchParams.get('next'), url.origin);
	if (locals.user) redirect(303, next);
	const token = readChallengeCookie(cookies, url);
	const open = token ? (await secondFactor.challengeUser(token)) !== null : false;
	return { next, open, minutes: secondFactor.CHALLENGE_MINUTES };
};

const EXPIRED = `This sign-in step has ended (it lasts ${secondFactor.CHALLENGE_MINUTES} minutes and is used once). Sign in again with your e-mail and password.`;

export const actions: Actions = {
	default: async (event) => {
		const form = await parseForm(event.request, secondFactorCodeSchema);
		if (!form.ok) return form.failure;
		const token = readChallengeCookie(event.cookies, event.url);
		if (!token) return failForm(400, { form: EXPIRED });
		const result = await users.completeSecondFactor(token, form.data.code, event.getClientAddress(), event.locals.requestId);
		if (!result.ok) {
			if (result.reason === 'wrong_code') {
				return failForm(400, {
					code: 'That code is not right, or was already used. Enter the current 6-digit code from your authenticator app, or an unused recovery code.'
				});
			}
			deleteChallengeCookie(event.cookies, event.url);
			if (result.reason === 'locked') {
				const minutes = result.lockedUntil ? Math.max(1, Math.ceil((result.lockedUntil.getTime() - Date.now()) / 60_000)) : 15;
				return failForm(429, { form: `Too many wrong codes. Sign-in is locked for ${minutes} minutes; try again later or ask an administrator.` });
			}
			if (result.reason === 'deactivated')
				return failForm(400, { form: 'This account has been deactivated. Ask a stewardship administrator if you still need access.' });
			return failForm(400, { form: EXPIRED });
		}
		deleteChallengeCookie(event.cookies, event.url);
		session.setSessionCookie(event.cookies, event.url, result.token, result.expiresAt);
		redirect(303, safeNext(form.data.next, event.url.origin));
	}
};
