import { redirect } from '@sveltejs/kit';
import { failForm, parseForm } from '$lib/server/http';
import { secondFactor, sessions as session, setChallengeCookie, users } from '$lib/server/auth';
import { safeNext, signInSchema } from '$lib/validation/users';
import type { Actions, PageServerLoad } from './$types';

// url.origin is ORIGIN under adapter-node: `next` must resolve to a path on it
export const load: PageServerLoad = ({ locals, url }) => {
	const next = safeNext(url.searchParams.get('next'), url.origin);
	if (locals.user) redirect(303, next);
	return { next };
};

function minutesUntil(date: Date | undefined) {
	return date ? Math.max(1, Math.ceil((date.getTime() - Date.now()) / 60_000)) : 15;
}

export const actions: Actions = {
	default: async (event) => {
		const form = await parseForm(event.request, signInSchema);
		if (!form.ok) return form.failure;
		const { email, password, next } = form.data;
		// Sign-in always starts a new session (no session fixation): drop any old one first.
		if (event.locals.sessionId) {
			await users.signOut(event.locals.sessionId, {
				actorId: event.locals.user?.id ?? null,
				actorLabel: event.locals.user?.email ?? email,
				requestId: event.locals.requestId
			});
		}
		const result = await users.signIn(email, password, event.getClientAddress(), event.locals.requestId);
		if (!result.ok && result.reason === 'second_factor') {
			setChallengeCookie(event.cookies, event.url, result.challenge.token);
			redirect(303, `/sign-in/second-factor?next=${encodeURIComponent(safeNext(next, event.url.origin))}`);
		}
		if (!result.ok) {
			const minutes = minutesUntil(result.lockedUntil);
			const messages = {
				invalid: 'That e-mail and password do not match an account.',
				locked: `Too many failed sign-ins. Sign-in is locked for ${minutes} minutes; try again later or ask an administrator.`,
				address_locked: `That e-mail and password do not match an account. Many sign-ins from this network address have failed, so each attempt is slowed for ${minutes} minutes; the right password still signs you in.`,
				deactivated: 'This account has been deactivated. Ask a stewardship administrator if you still need access.'
			};
			return failForm(result.reason === 'locked' || result.reason === 'address_locked' ? 429 : 400, { form: messages[result.reason] }, { email });
		}
		session.setSessionCookie(event.cookies, event.url, result.token, result.expiresAt);
		// an administrator without a second factor sets one up before anything else (the hook holds them there too)
		if (secondFactor.isRequiredFor(result.user.role)) redirect(303, '/account/security');
		redirect(303, safeNext(next, event.url.origin));
	}
};
