import { z } from 'zod';
import { ROLES } from '../roles';

export const signInSchema = z.object({
	email: z.string().trim().min(1, 'Enter your e-mail address.').max(254).pipe(z.email('Enter a valid e-mail address.')),
	password: z.string().min(1, 'Enter your password.').max(200, 'Password is too long.'),
	next: z.string().optional()
});

export const passwordSchema = z
	.string()
	.min(12, 'Password must be at least 12 characters.')
	.max(200, 'Password is too long.');

export const userCreateSchema = z.object({
	email: z.string().trim().max(254).pipe(z.email('Enter a valid e-mail address.')),
	displayName: z
		.string()
		.trim()
		.min(2, 'Enter the person’s name (at least 2 characters).')
		.max(120, 'Name is too long.')
		// invisible characters alone (zero-width spaces, joiners) are not a name
		.refine((name) => (name.match(/[\p{L}\p{N}]/gu) ?? []).length >= 2, 'Enter the person’s name (at least 2 letters).'),
	role: z.enum(ROLES, { message: 'Choose a role: pharmacist, physician or admin.' }),
	password: passwordSchema
});

export const userUpdateSchema = z.object({
	id: z.uuid('Unknown user.'),
	role: z.enum(ROLES, { message: 'Choose a role: pharmacist, physician or admin.' }),
	active: z.enum(['true', 'false'], { message: 'Choose active or deactivated.' }).transform((v) => v === 'true')
});

export const passwordResetSchema = z.object({
	id: z.uuid('Unknown user.'),
	password: passwordSchema
});

/** Only same-site paths may be a sign-in's destination (no open redirect). */
export function safeNext(next: string | null | undefined): string {
	if (!next || !next.startsWith('/') || next.startsWith('//') || next.startsWith('/\\')) return '/';
	return next;
}
