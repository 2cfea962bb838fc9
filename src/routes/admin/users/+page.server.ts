import { secondFactor, users } from '$lib/server/auth';
import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { actor } from '$lib/server/audit';
import { failForm, parseForm } from '$lib/server/http';
import { passwordResetSchema, userCreateSchema, userIdSchema, userUpdateSchema } from '$lib/validation/users';
import type { Actions, PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url }) => {
	const me = requirePageRole(locals, url, 'admin');
	return { users: await users.list(), meId: me.id };
};

export const actions: Actions = {
	create: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const form = await parseForm(request, userCreateSchema);
		if (!form.ok) return form.failure;
		try {
			await users.create(form.data, actor(locals));
		} catch (error) {
			if (error instanceof users.EmailTakenError) {
				return failForm(400, { email: error.message }, { email: form.data.email, displayName: form.data.displayName, role: form.data.role });
			}
			throw error;
		}
		return { created: form.data.email };
	},
	update: async ({ locals, request }) => {
		const me = requireRole(locals, 'admin');
		const form = await parseForm(request, userUpdateSchema);
		if (!form.ok) return form.failure;
		if (form.data.id === me.id && (!form.data.active || form.data.role !== 'admin')) {
			return failForm(400, { form: 'You cannot remove your own administrator role or deactivate yourself; ask another administrator.' });
		}
		const result = await users.update(form.data.id, { role: form.data.role, active: form.data.active }, actor(locals));
		if (!result) return failForm(404, { form: 'That user no longer exists.' });
		return { updated: form.data.id };
	},
	resetPassword: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const form = await parseForm(request, passwordResetSchema);
		if (!form.ok) return form.failure;
		const done = await users.resetPassword(form.data.id, form.data.password, actor(locals));
		if (!done) return failForm(404, { form: 'That user no longer exists.' });
		return { reset: form.data.id };
	},
	resetSecondFactor: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const form = await parseForm(request, userIdSchema);
		if (!form.ok) return form.failure;
		const done = await secondFactor.reset(form.data.id, actor(locals));
		if (!done) return failForm(404, { form: 'That user has no second factor to reset (or no longer exists).' });
		return { secondFactorReset: form.data.id };
	}
};
