import { feedTokens } from '$lib/server/auth';
import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { actor } from '$lib/server/audit';
import { failForm, parseForm } from '$lib/server/http';
import { FEED_TOKEN_LIFETIMES_DAYS, feedTokenCreateSchema, feedTokenRevokeSchema } from '$lib/validation/feed';
import type { Actions, PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url }) => {
	requirePageRole(locals, url, 'admin');
	return { tokens: await feedTokens.list(), feedUrl: `${url.origin}/api/v1/feed`, lifetimesDays: FEED_TOKEN_LIFETIMES_DAYS, now: new Date() };
};

export const actions: Actions = {
	create: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const form = await parseForm(request, feedTokenCreateSchema);
		if (!form.ok) return form.failure;
		const created = await feedTokens.create(form.data.name, actor(locals), { expiresInDays: form.data.expiresInDays });
		// the secret leaves the server this once; only its hash is stored
		return { created: { id: created.id, name: created.name, secret: created.secret, expiresAt: created.expiresAt } };
	},
	revoke: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const form = await parseForm(request, feedTokenRevokeSchema);
		if (!form.ok) return form.failure;
		const revoked = await feedTokens.revoke(form.data.id, actor(locals));
		if (!revoked) return failForm(404, { form: 'That token does not exist or was already revoked.' });
		return { revoked: revoked.name };
	}
};
