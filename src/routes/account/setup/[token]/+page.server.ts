import { error, redirect } from '@sveltejs/kit';
import { z } from 'zod';
import { completeAccountSetup, readAccountSetup, sessions as session } from '$lib/server/auth';
import { failForm, parseForm } from '$lib/server/http';
import { passwordSchema, userCreateSchema } from '$lib/validation/users';
import type { Actions, PageServerLoad } from './$types';

// Public: the single-use token in the path is the only key. It reveals the e-mail address only.
const MESSAGES = {
	invalid: 'This link is not valid. It may have been copied incompletely. Ask for a new one after answering a recommendation, or ask the stewardship team.',
	expired: 'This link has expired. Ask for a new one after answering a recommendation, or ask the stewardship team.',
	used: 'This link has already been used to set up an account. Sign in with it instead.',
	has_account: 'An Ebbline account with this e-mail already exists. Sign in to see your recommendations.'
} as const;

const setupSchema = z
	.object({ displayName: userCreateSchema.shape.displayName, password: passwordSchema, confirm: z.string() })
	.refine((v) => v.password === v.confirm, { path: ['confirm'], message: 'The two passwords differ: type the same password twice.' });

export const load: PageServerLoad = async ({ params, setHeaders }) => {
	setHeaders({ 'cache-control': 'no-store', 'x-robots-tag': 'noindex' });
	const found = await readAccountSetup(params.token);
	if (found.state !== 'open') error(found.state === 'invalid' ? 404 : 410, MESSAGES[found.state]);
	return { email: found.email, name: found.name };
};

export const actions: Actions = {
	default: async (event) => {
		const form = await parseForm(event.request, setupSchema);
		if (!form.ok) return form.failure;
		const result = await completeAccountSetup(event.params.token, form.data, event.locals.requestId);
		if (!result.ok) return failForm(result.reason === 'invalid' ? 404 : 410, { form: MESSAGES[result.reason] }, { displayName: form.data.displayName });
		if (event.locals.sessionId) await session.invalidateSession(event.locals.sessionId);
		const created = await session.createSession(result.userId);
		session.setSessionCookie(event.cookies, event.url, created.token, created.expiresAt);
		redirect(303, '/recommendations');
	}
};
