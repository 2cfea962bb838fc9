import { z } from 'zod';
import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { actor } from '$lib/server/audit';
import { parseForm } from '$lib/server/http';
import { notifications } from '$lib/server/notifications';
import { formatDateTime } from '$lib/server/recommendations';
import type { Actions, PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url }) => {
	const user = requirePageRole(locals, url, 'pharmacist', 'physician', 'admin');
	const rows = await notifications.list(user.id);
	return { notifications: rows.map((n) => ({ id: n.id, text: n.text, link: n.link, at: formatDateTime(n.createdAt), unread: n.readAt === null })) };
};

export const actions: Actions = {
	read: async ({ locals, request }) => {
		const user = requireRole(locals, 'pharmacist', 'physician', 'admin');
		const form = await parseForm(request, z.object({ id: z.uuid().optional() }));
		if (!form.ok) return form.failure;
		const who = actor(locals);
		const marked = await notifications.markRead({ ...who, actorId: user.id }, form.data.id);
		return { marked };
	}
};
