import { json } from '@sveltejs/kit';
import { requireRole } from '$lib/server/auth/access';
import { badRequest, readJsonBody } from '$lib/server/http';
import { loop } from '$lib/server/recommendations';
import { withdrawSchema } from '$lib/validation/recommendation-loop';
import type { RequestHandler } from './$types';

/**
 * Withdraws a recommendation that still waits for an answer: { reason }. Only the pharmacist who sent
 * it, or an administrator. 400 names the field at fault; 403, 404 and 409 say why not.
 */
export const POST: RequestHandler = async ({ locals, params, request }) => {
	const user = requireRole(locals, 'pharmacist', 'admin');
	const body = await readJsonBody(request);
	if (!body.ok) return body.response;
	const parsed = withdrawSchema.safeParse({ ...(typeof body.value === 'object' && body.value !== null ? body.value : {}), id: params.id });
	if (!parsed.success) return badRequest(parsed.error, 'Invalid withdrawal');
	const result = await loop.withdraw(parsed.data.id, parsed.data.reason, { ...user, requestId: locals.requestId ?? null });
	if (!result.ok)
		return json(
			{ error: result.error, ...(result.field ? { issues: { [result.field]: result.error } } : {}) },
			{ status: result.status === 422 ? 400 : result.status }
		);
	return json({ withdrawn: parsed.data.id });
};
