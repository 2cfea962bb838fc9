import { error, redirect } from '@sveltejs/kit';
import { z } from 'zod';
import { transition } from '$lib/flags/lifecycle';
import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { accessLog } from '$lib/server/audit';
import { failForm, parseForm } from '$lib/server/http';
import * as recs from '$lib/server/recommendations';
import { composeSchema } from '$lib/validation/recommendations';
import type { Actions, PageServerLoad } from './$types';

const flagId = (id: string) => (z.uuid().safeParse(id).success ? id : error(404, 'No flag with that id.'));

export const load: PageServerLoad = async ({ locals, url, params }) => {
	const user = requirePageRole(locals, url, 'pharmacist', 'admin');
	const ctx = await recs.composeContext(flagId(params.id));
	if (!ctx) error(404, 'No flag with that id.');
	await accessLog.recordRead(locals, { kind: 'recommendation_compose', objectId: params.id, patientId: ctx.patient.id, route: '/flags/[id]/recommend' });
	const allowed = transition({ state: ctx.flag.state, assignedTo: ctx.flag.assignedTo }, { kind: 'recommend', recommendationId: '' }, user.id, {
		isAdmin: user.role === 'admin'
	});
	return {
		...ctx,
		assessment: { ...ctx.assessment, at: recs.formatDateTime(ctx.assessment.at) },
		previous: ctx.previous.map((p) => ({ ...p, createdAt: recs.formatDateTime(p.createdAt) })),
		blocked: allowed.ok ? null : allowed.reason,
		caution: recs.PROPOSAL_CAUTION
	};
};

export const actions: Actions = {
	send: async ({ locals, request, params }) => {
		const user = requireRole(locals, 'pharmacist', 'admin');
		const form = await parseForm(request, composeSchema);
		if (!form.ok) return form.failure;
		const result = await recs.send(flagId(params.id), form.data, { ...user, requestId: locals.requestId });
		if (!result.ok) return failForm(result.status, { [result.field ?? 'form']: result.error }, form.values);
		redirect(303, `/board?sent=${result.recommendationId}`);
	}
};
