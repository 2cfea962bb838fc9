import { fail } from '@sveltejs/kit';
import { z } from 'zod';
import { unstorableText } from './input-guard';

import { fieldErrors, type FieldErrors, type FormFailure } from '../../forms';

export { fieldErrors, type FieldErrors, type FormFailure };

/** The one shape every failed form action returns: the values to echo and a message per field. */
export function failForm(status: number, errors: FieldErrors, values: Record<string, string> = {}) {
	return fail(status, { values, errors } satisfies FormFailure);
}

/**
 * Every field as text, for forms whose fields are named at run time (a rule set, an agent's renal
 * bands) and checked by their own parser after parseForm's input guard.
 */
export const textFields = z.record(z.string(), z.string());

/**
 * Validates a form with a zod schema. On failure returns `fail(400, …)` echoing the submitted
 * values (never passwords) and naming the field at fault; on success the parsed data.
 */
export async function parseForm<S extends z.ZodType>(request: Request, schema: S) {
	const formData = await request.formData();
	const values: Record<string, string> = {};
	for (const [key, value] of formData) if (typeof value === 'string') values[key] = value;
	const echo = () => Object.fromEntries(Object.entries(values).filter(([k]) => !/password|token/i.test(k)));
	// text PostgreSQL cannot store (a NUL, an unpaired surrogate) is named, not left to fail as a 500
	const unstorable = Object.entries(values)
		.map(([k, v]) => [k, unstorableText(k) ?? unstorableText(v)] as const)
		.filter(([, reason]) => reason);
	if (unstorable.length)
		return { ok: false as const, failure: failForm(400, Object.fromEntries(unstorable.map(([k, reason]) => [k, `This field ${reason}.`])), echo()) };
	const parsed = schema.safeParse(values);
	if (!parsed.success) return { ok: false as const, failure: failForm(400, fieldErrors(parsed.error), echo()) };
	return { ok: true as const, data: parsed.data as z.infer<S>, values };
}

/** Field errors as one line naming each field ("from: must be a date to: …"), for a plain-text 400. */
export function describeFieldErrors(errors: FieldErrors): string {
	return Object.entries(errors)
		.map(([field, message]) => `${field}: ${message}`)
		.join(' ');
}

/** For API routes: 400 with `{ error, issues }` naming each field. */
export function badRequest(error: z.ZodError, message = 'Invalid request') {
	return new Response(
		JSON.stringify({ error: `${message}: ${error.issues.map((i) => `${i.path.join('.') || 'body'}: ${i.message}`).join('; ')}`, issues: fieldErrors(error) }),
		{ status: 400, headers: { 'content-type': 'application/json' } }
	);
}
