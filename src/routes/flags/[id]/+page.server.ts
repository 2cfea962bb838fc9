import { error, redirect } from '@sveltejs/kit';
import { z } from 'zod';
import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { accessLog } from '$lib/server/audit';
import { flagQueries as board } from '$lib/server/flags';
import { failForm, parseForm } from '$lib/server/http';
import { loop, formatDateTime } from '$lib/server/recommendations';
import { withdrawSchema } from '$lib/validation/recommendation-loop';
import type { Actions, PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url, params }) => {
	const user = requirePageRole(locals, url, 'pharmacist', 'admin');
	if (!z.uuid().safeParse(params.id).success) error(404, 'No flag with that id.');
	const [flag, sentRecs] = await Promise.all([board.getFlagDetail(params.id, user), loop.forFlag(params.id)]);
	if (!flag) {
		// a flag merged into its order's flag lives on as one of that flag's findings
		const holder = await board.flagIdOfFinding(params.id);
		if (holder) redirect(308, `/flags/${holder}`);
		error(404, 'No flag with that id.');
	}
	const recommendations = sentRecs.map((r) => ({
		id: r.id,
		status: r.status,
		to: r.to,
		toEmail: r.toEmail,
		pharmacistName: r.pharmacistName,
		proposed: r.proposedText,
		sent: formatDateTime(r.createdAt),
		reminderCount: r.reminderCount,
		reminded: r.remindedAt ? formatDateTime(r.remindedAt) : null,
		escalated: r.escalatedAt ? formatDateTime(r.escalatedAt) : null,
		linkExpired: r.status === 'sent' && r.tokenExpiresAt <= new Date(),
		responded: r.respondedAt ? formatDateTime(r.respondedAt) : null,
		withdrawn: r.withdrawnAt ? formatDateTime(r.withdrawnAt) : null,
		withdrawnReason: r.withdrawnReason,
		canWithdraw: r.status === 'sent' && (r.pharmacistId === user.id || user.role === 'admin')
	}));
	await accessLog.recordRead(locals, { kind: 'flag', objectId: flag.id, patientId: flag.patient.id, route: '/flags/[id]' });
	return { flag, recommendations, me: { id: user.id } };
};

export const actions: Actions = {
	/** the sender (or an administrator) withdraws a recommendation still waiting for an answer */
	withdraw: async ({ locals, request }) => {
		const user = requireRole(locals, 'pharmacist', 'admin');
		const form = await parseForm(request, withdrawSchema);
		if (!form.ok) return form.failure;
		const result = await loop.withdraw(form.data.id, form.data.reason, { ...user, requestId: locals.requestId ?? null });
		if (!result.ok) return failForm(result.status === 422 ? 400 : result.status, { [result.field ?? 'form']: result.error }, form.values);
		return { withdrawn: form.data.id };
	}
};
