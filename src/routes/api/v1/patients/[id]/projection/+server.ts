import { json } from '@sveltejs/kit';
import { z } from 'zod';
import { requireRole } from '$lib/server/auth/access';
import { accessLog } from '$lib/server/audit';
import { badRequest } from '$lib/server/http';
import { patients } from '$lib/server/patients';
import { projectionQuerySchema } from '$lib/validation/patients';
import type { RequestHandler } from './$types';

/**
 * GET /api/v1/patients/[id]/projection?order=…[&dose=mg&interval=h&infusion=h]: concentration–time
 * curves over 72 h of the order's current regimen and the proposed (or typed-in) one, with the
 * agent's target window.
 */
export const GET: RequestHandler = async ({ locals, params, url }) => {
	const user = requireRole(locals, 'pharmacist', 'admin', 'physician');
	if (!z.uuid().safeParse(params.id).success) {
		return json({ error: 'id: must be a patient id (UUID)', issues: { id: 'must be a patient id (UUID)' } }, { status: 400 });
	}
	const parsed = projectionQuerySchema.safeParse(Object.fromEntries(url.searchParams));
	if (!parsed.success) return badRequest(parsed.error, 'Invalid projection query');
	const read = { kind: 'projection', objectId: params.id, patientId: params.id, route: '/api/v1/patients/[id]/projection' } as const;
	if (!(await patients.visibleTo(user, params.id))) {
		await accessLog.recordRead(locals, { ...read, status: 404 });
		return json({ error: 'No patient with that id.' }, { status: 404 });
	}
	const result = await patients.projection(params.id, parsed.data);
	if (!result.ok) {
		return json({ error: result.error, ...(result.field ? { issues: { [result.field]: result.error } } : {}) }, { status: result.status });
	}
	await accessLog.recordRead(locals, read);
	return json(result.projection);
};
