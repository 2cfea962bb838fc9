import { json, redirect } from '@sveltejs/kit';
import { z } from 'zod';
import { requireRole } from '$lib/server/auth/access';
import { accessLog } from '$lib/server/audit';
import { flagQueries as board } from '$lib/server/flags';
import type { RequestHandler } from './$types';

/**
 * One flag: its findings, the headline finding, facts, the full trace of its assessment, proposed
 * regimen, events, version, actions. The id of a flag merged into its order's flag redirects there.
 */
export const GET: RequestHandler = async ({ locals, params }) => {
	const user = requireRole(locals, 'pharmacist', 'admin');
	if (!z.uuid().safeParse(params.id).success) {
		return json({ error: 'id: must be a flag id (UUID)', issues: { id: 'must be a flag id (UUID)' } }, { status: 400 });
	}
	const flag = await board.getFlagDetail(params.id, user);
	if (!flag) {
		const holder = await board.flagIdOfFinding(params.id);
		if (holder) redirect(308, `/api/v1/flags/${holder}`);
		return json({ error: 'No flag with that id.' }, { status: 404 });
	}
	await accessLog.recordRead(locals, { kind: 'flag_api', objectId: flag.id, patientId: flag.patient.id, route: '/api/v1/flags/[id]' });
	return json(flag);
};
