import { error } from '@sveltejs/kit';
import { z } from 'zod';
import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { accessLog, actor } from '$lib/server/audit';
import { failForm, parseForm } from '$lib/server/http';
import { recordRestart, patients, renalReplacement } from '$lib/server/patients';
import { orderRestartSchema, renalReplacementClearSchema, renalReplacementSetSchema } from '$lib/validation/renal-replacement';
import type { Actions, PageServerLoad } from './$types';

const patientId = (id: string) => {
	if (!z.uuid().safeParse(id).success) error(404, 'No patient with that id.');
	return id;
};

// Pharmacists and administrators work here; physicians read the patients they prescribe for or were
// sent a recommendation about (no flag actions, no dialysis status changes); others are "not found".
export const load: PageServerLoad = async ({ locals, url, params }) => {
	const user = requirePageRole(locals, url, 'pharmacist', 'admin', 'physician');
	const id = patientId(params.id);
	if (!(await patients.visibleTo(user, id))) {
		await accessLog.recordRead(locals, { kind: 'patient', objectId: id, patientId: id, route: '/patients/[id]', status: 404 });
		error(404, 'No patient with that id.');
	}
	const [detail, rrt] = await Promise.all([patients.getPatientDetail(id), renalReplacement.statusOf(id)]);
	if (!detail) error(404, 'No patient with that id.');
	await accessLog.recordRead(locals, { kind: 'patient', objectId: id, patientId: id, route: '/patients/[id]' });
	return { ...detail, renalReplacement: rrt, canWorkFlags: user.role !== 'physician', requestedOrder: url.searchParams.get('order') };
};

export const actions: Actions = {
	renalReplacementSet: async ({ locals, request, params }) => {
		requireRole(locals, 'pharmacist', 'admin');
		const id = patientId(params.id);
		const form = await parseForm(request, renalReplacementSetSchema);
		if (!form.ok) return form.failure;
		if (!(await patients.exists(id))) return failForm(404, { form: 'No patient with that id.' });
		const { ordersQueued } = await renalReplacement.setStatus(
			id,
			{ mode: form.data.mode, sinceLocal: form.data.since, reason: form.data.reason },
			actor(locals)
		);
		return { renalReplacementSaved: 'set' as const, ordersQueued };
	},
	orderRestart: async ({ locals, request, params }) => {
		requireRole(locals, 'pharmacist', 'admin');
		const id = patientId(params.id);
		const form = await parseForm(request, orderRestartSchema);
		if (!form.ok) return form.failure;
		if (!(await recordRestart(id, form.data.orderId, actor(locals)))) return failForm(404, { form: 'That order is not an active order of this patient.' });
		return { restartRecorded: form.data.orderId };
	},
	renalReplacementClear: async ({ locals, request, params }) => {
		requireRole(locals, 'pharmacist', 'admin');
		const id = patientId(params.id);
		const form = await parseForm(request, renalReplacementClearSchema);
		if (!form.ok) return form.failure;
		if (!(await patients.exists(id))) return failForm(404, { form: 'No patient with that id.' });
		const { ordersQueued } = await renalReplacement.clearStatus(id, { reason: form.data.reason }, actor(locals));
		return { renalReplacementSaved: 'clear' as const, ordersQueued };
	}
};
