// What a failed form action sends back (src/lib/server/http/forms.ts builds it) and how a page reads it.
// Pure: pages and the server import it.
import type { z } from 'zod';

/** A message per field, keyed by the field's name (dotted for nested fields); `form` for the whole form. */
export type FieldErrors = Record<string, string>;
export type FormFailure = { values: Record<string, string>; errors: FieldErrors };

function part(form: unknown, key: keyof FormFailure): Record<string, string> {
	if (form === null || typeof form !== 'object' || !(key in form)) return {};
	const value = (form as Record<string, unknown>)[key];
	return value !== null && typeof value === 'object' ? (value as Record<string, string>) : {};
}

/** The field messages of a page's `form` prop: empty when the last action succeeded or none was sent. */
export const formErrors = (form: unknown): FieldErrors => part(form, 'errors');

/** The values a failed action echoes back, to refill the fields: empty otherwise. */
export const formValues = (form: unknown): Record<string, string> => part(form, 'values');

/** The first message per field, keyed by the field's name (dotted for nested fields). */
export function fieldErrors(error: z.ZodError): FieldErrors {
	const errors: FieldErrors = {};
	for (const issue of error.issues) {
		const key = issue.path.join('.') || 'form';
		errors[key] ??= issue.message;
	}
	return errors;
}
