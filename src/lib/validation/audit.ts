import { z } from 'zod';

/** A local date-time as an <input type="datetime-local"> sends it (seconds optional), or a bare date. */
export const localMoment = z
	.string()
	.trim()
	.regex(/^\d{4}-\d{2}-\d{2}(T\d{2}:\d{2}(:\d{2})?)?$/, 'Enter a date and time as YYYY-MM-DDTHH:MM.')
	// JavaScript rolls 30 February over to 2 March; a date that exists reads back unchanged
	.refine((v) => {
		const t = Date.parse(v.length === 10 ? `${v}T00:00:00Z` : `${v}Z`);
		return Number.isFinite(t) && new Date(t).toISOString().slice(0, v.length) === v;
	}, 'That date does not exist.');

export const optional = <T extends z.ZodType>(schema: T) => z.preprocess((v) => (typeof v === 'string' && v.trim() === '' ? undefined : v), schema.optional());

export const cursor = optional(z.coerce.number().int('Unknown page.').positive('Unknown page.'));

/** Query string of /admin/audit and its CSV export. */
export const auditQuerySchema = z
	.object({
		actor: optional(z.string().trim().max(254, 'Actor is too long.')),
		action: optional(z.string().trim().max(120, 'Action is too long.')),
		objectType: optional(z.string().trim().max(120, 'Object type is too long.')),
		objectId: optional(z.string().trim().max(200, 'Object id is too long.')),
		from: optional(localMoment),
		to: optional(localMoment),
		before: cursor,
		after: cursor
	})
	.refine((q) => !q.from || !q.to || q.from <= q.to, { path: ['to'], message: 'The end must be on or after the start.' });

export type AuditQuery = z.infer<typeof auditQuerySchema>;
