import { z } from 'zod';
import { ROLES } from '../roles';

export const signInSchema = z.object({
	email: z.string({ error: 'Enter your e-mail address.' }).trim().min(1, 'Enter your e-mail address.').max(254).pipe(z.email('Enter a valid e-mail address.')),
	password: z.string({ error: 'Enter your password.' }).min(1, 'Enter your password.').max(200, 'Password is too long.'),
	next: z.string().optional()
});

export const passwordSchema = z.string().min(12, 'Password must be at least 12 characters.').max(200, 'Password is too long.');

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

// C0 and C1 control characters (tab, newline, NUL, …), which URL parsers drop or treat as breaks
// eslint-disable-next-line no-control-regex -- finding control characters is this pattern's whole job
const CONTROL = /[\u0000-\u001f\u007f-\u009f]/;

function decodedOnce(text: string): string | null {
	try {
		return decodeURIComponent(text);
	} catch {
		return null;
	}
}

/**
 * Where a sign-in may send the browser afterwards: a path on Ebbline's own origin, else '/'. The
 * value is parsed against the origin the way a browser would resolve it, and must stay on that
 * origin; control characters and backslashes are refused outright, also once percent-decoded, so
 * "/\t/evil.example", "/%09/evil.example" and "/\\evil.example" cannot become "//evil.example"
 * in some later step. The answer is rebuilt from the parsed URL (path, query, fragment).
 */
export function safeNext(next: string | null | undefined, origin: string): string {
	if (!next || next.length > 2000 || !next.startsWith('/')) return '/';
	for (const form of [next, decodedOnce(next)]) {
		if (form === null || CONTROL.test(form) || form.includes('\\') || form.startsWith('//')) return '/';
	}
	let url: URL;
	try {
		url = new URL(next, origin);
	} catch {
		return '/';
	}
	if (url.origin !== new URL(origin).origin) return '/';
	return url.pathname + url.search + url.hash;
}

/** The second step of a sign-in, and confirming or switching off a second factor: a 6-digit code or a recovery code. */
const secondFactorCode = z
	.string({ error: 'Enter the 6-digit code from your authenticator app or a recovery code.' })
	.trim()
	.min(1, 'Enter the 6-digit code from your authenticator app or a recovery code.')
	.max(40, 'That code is too long: enter 6 digits or a recovery code (XXXX-XXXX-XXXX-XXXX).');

export const secondFactorCodeSchema = z.object({
	code: secondFactorCode,
	next: z.string().optional()
});

/** Making new recovery codes asks for a current code, in its own field (the page also has the switch-off form's). */
export const regenerateCodesSchema = z.object({ regenerateCode: secondFactorCode });

export const userIdSchema = z.object({ id: z.uuid('Unknown user.') });
