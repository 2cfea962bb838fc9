import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { actor } from '$lib/server/audit';
import { config } from '$lib/server/config';
import { parseForm } from '$lib/server/http';
import { backup } from '$lib/server/ops';
import { lastFailedJob, QUEUES } from '$lib/server/queue';
import * as settings from '$lib/server/settings';
import { settingsFormSchema } from '$lib/validation/settings';
import type { Actions, PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url }) => {
	requirePageRole(locals, url, 'admin');
	const [current, backups] = await Promise.all([settings.get(), lastFailedJob(QUEUES.backupNightly).then(backup.status)]);
	return { settings: current, defaults: settings.defaults(), timeZone: config.hospitalTimeZone, backups };
};

export const actions: Actions = {
	save: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const form = await parseForm(request, settingsFormSchema);
		if (!form.ok) return form.failure;
		const result = await settings.update(form.data, actor(locals));
		return { saved: result.changed, scheduleError: result.scheduleError };
	}
};
