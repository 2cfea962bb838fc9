import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { requireRole } from '$lib/server/auth/access';
import { accessLog } from '$lib/server/audit';
import { patients } from '$lib/server/patients';
import type { RequestHandler } from './$types';

/** One patient: demographics, ward/bed, body size, orders with their latest assessment, labs, renal history, flags. */
export const GET: RequestHandler = async ({ locals, params }) => {
	const user = requireRole(locals, 'pharmacist', 'admin', 'physician');
	if (!z.uuid().safeParse(params.id).success) {
		return json({ error: 'id: must be a patient id (UUID)', issues: { id: 'must be a patient id (UUID)' } }, { status: 400 });
	}
	const visible = await patients.visibleTo(user, params.id);
	const detail = visible ? await patients.getPatientDetail(params.id) : null;
	const read = { kind: 'patient_api', objectId: params.id, patientId: params.id, route: '/api/v1/patients/[id]' } as const;
	if (!visible) await accessLog.recordRead(locals, { ...read, status: 404 });
	if (!detail) return json({ error: 'No patient with that id.' }, { status: 404 });
	await accessLog.recordRead(locals, read);
	return json(detail);
};
