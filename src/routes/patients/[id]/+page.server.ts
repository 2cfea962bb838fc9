import { error } from '@sveltejs/kit';
import { z } from 'zod';
import { requirePageRole } from '$lib/server/access';
import * as patients from '$lib/server/patients';
import type { PageServerLoad } from './$types';

// Pharmacists and administrators work here; physicians read it (no flag actions on this page).
export const load: PageServerLoad = async ({ locals, url, params }) => {
	const user = requirePageRole(locals, url, 'pharmacist', 'admin', 'physician');
	if (!z.uuid().safeParse(params.id).success) error(404, 'No patient with that id.');
	const detail = await patients.getPatientDetail(params.id);
	if (!detail) error(404, 'No patient with that id.');
	return { ...detail, canWorkFlags: user.role !== 'physician', requestedOrder: url.searchParams.get('order') };
};
