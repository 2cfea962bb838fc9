import { secondFactor, throttle } from '$lib/server/auth';
import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { actor } from '$lib/server/audit';
import { failForm, parseForm } from '$lib/server/http';
import { regenerateCodesSchema, secondFactorCodeSchema } from '$lib/validation/users';
import type { Actions, PageServerLoad } from './$types';

const WRONG_CODE = 'That code is not right. Enter the 6-digit code your authenticator app shows now for Ebbline.';

/**
 * Changing a second factor that is on (new recovery codes, turning it off) asks for a current code, so a
 * borrowed session cannot take it over; wrong codes count against the account like wrong sign-in codes.
 */
async function checkCurrentCode(me: App.SessionUser, request: Request, field: 'code' | 'regenerateCode') {
	const form = field === 'code' ? await parseForm(request, secondFactorCodeSchema) : await parseForm(request, regenerateCodesSchema);
	if (!form.ok) return form.failure;
	const code = 'code' in form.data ? form.data.code : form.data.regenerateCode;
	const key = `email:${me.email}`;
	if ((await throttle.check(key)).locked) return failForm(429, { form: 'Too many wrong codes: this is locked for 15 minutes.' });
	if (!(await secondFactor.verify(me.id, code))) {
		const count = await throttle.fail(key);
		if (count.lockedUntil) return failForm(429, { form: 'Too many wrong codes: this is locked for 15 minutes, and so is signing in to this account.' });
		return failForm(400, { [field]: 'That code is not right. Enter the current 6-digit code from your app, or an unused recovery code.' });
	}
	return null;
}

export const load: PageServerLoad = async ({ locals, url }) => {
	const me = requirePageRole(locals, url);
	const status = await secondFactor.status(me.id);
	return {
		status,
		required: secondFactor.isRequiredFor(me.role),
		setup: status.pending ? await secondFactor.pendingSetup(me.id, me.email) : null
	};
};

export const actions: Actions = {
	start: async ({ locals }) => {
		const me = requireRole(locals);
		if (!(await secondFactor.begin(me.id, actor(locals)))) return failForm(400, { form: 'A second factor is already set up for your account.' });
		return { started: true };
	},
	confirm: async ({ locals, request }) => {
		const me = requireRole(locals);
		const form = await parseForm(request, secondFactorCodeSchema);
		if (!form.ok) return form.failure;
		const codes = await secondFactor.confirm(me.id, form.data.code, actor(locals));
		if (!codes) return failForm(400, { code: WRONG_CODE });
		return { recoveryCodes: codes };
	},
	regenerate: async ({ locals, request }) => {
		const me = requireRole(locals);
		if (!(await secondFactor.status(me.id)).enrolled) return failForm(400, { form: 'Set up a second factor first: recovery codes belong to it.' });
		const refused = await checkCurrentCode(me, request, 'regenerateCode');
		if (refused) return refused;
		const codes = await secondFactor.regenerateRecoveryCodes(me.id, actor(locals));
		if (!codes) return failForm(400, { form: 'Set up a second factor first: recovery codes belong to it.' });
		return { recoveryCodes: codes };
	},
	disable: async ({ locals, request }) => {
		const me = requireRole(locals);
		if (secondFactor.isRequiredFor(me.role)) {
			return failForm(400, { form: 'Administrators must keep a second factor. To move it to a new phone, ask another administrator to reset it.' });
		}
		const refused = await checkCurrentCode(me, request, 'code');
		if (refused) return refused;
		await secondFactor.disable(me.id, actor(locals));
		return { disabled: true };
	}
};
