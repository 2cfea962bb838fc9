import { error } from '@sveltejs/kit';
import { config } from '$lib/server/config';
import { notifications } from '$lib/server/notifications';
import type { LayoutServerLoad } from './$types';

export const load: LayoutServerLoad = async ({ locals, url }) => {
	if (locals.denied) error(403, 'Your role does not give access to this page.');
	// Reading the path makes this load run on every navigation, so the unread count stays current.
	void url.pathname;
	return {
		user: locals.user && { displayName: locals.user.displayName, role: locals.user.role },
		timeZone: config.hospitalTimeZone,
		devMailbox: config.devMailbox,
		unreadNotifications: locals.user ? await notifications.unreadCount(locals.user.id) : 0
	};
};
