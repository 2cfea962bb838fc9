import { redirect } from '@sveltejs/kit';
import { actor } from '$lib/server/audit';
import { sessions as session, users } from '$lib/server/auth';
import type { Actions, PageServerLoad } from './$types';

export const load: PageServerLoad = () => redirect(303, '/');

export const actions: Actions = {
	default: async ({ locals, cookies, url }) => {
		if (locals.sessionId) await users.signOut(locals.sessionId, actor(locals));
		session.deleteSessionCookie(cookies, url);
		redirect(303, '/sign-in');
	}
};
