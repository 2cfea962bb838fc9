import { error } from '@sveltejs/kit';
import type { LayoutServerLoad } from './$types';

export const load: LayoutServerLoad = ({ locals }) => {
	if (locals.denied) error(403, 'Your role does not give access to this page.');
	return { user: locals.user && { displayName: locals.user.displayName, role: locals.user.role } };
};
