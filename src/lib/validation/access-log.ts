import { z } from 'zod';
import { cursor, localMoment, optional } from './audit';

/** What a row of the access log records: a read of one kind of object, or a refusal by the role guard. */
export const ACCESS_KINDS = ['patient', 'patient_api', 'projection', 'flag', 'flag_api', 'recommendation_compose', 'answer_link', 'denied'] as const;
export type AccessKind = (typeof ACCESS_KINDS)[number];

export const ACCESS_KIND_LABELS: Record<AccessKind, string> = {
	patient: 'Patient page',
	patient_api: 'Patient API',
	projection: 'Projection API',
	flag: 'Flag page',
	flag_api: 'Flag API',
	recommendation_compose: 'Recommendation form',
	answer_link: 'Answer link',
	denied: 'Refused by role'
};

/** 'read': the object was shown (status 200); 'refused': a 403 from the role guard or a 404 for a patient not theirs. */
export const ACCESS_OUTCOMES = ['read', 'refused'] as const;

/** Query string of /admin/access and its CSV export. */
export const accessQuerySchema = z
	.object({
		actor: optional(z.string().trim().max(254, 'Actor is too long.')),
		kind: optional(z.enum(ACCESS_KINDS, { error: `Kind must be one of: ${ACCESS_KINDS.join(', ')}.` })),
		patient: optional(
			z
				.string()
				.trim()
				.max(64, 'Patient is too long: enter an MRN or a patient id.')
				.regex(/^[A-Za-z0-9-]+$/, 'Patient must be an MRN or a patient id (letters, digits and hyphens).')
		),
		outcome: optional(z.enum(ACCESS_OUTCOMES, { error: 'Outcome must be read or refused.' })),
		from: optional(localMoment),
		to: optional(localMoment),
		before: cursor,
		after: cursor
	})
	.refine((q) => !q.from || !q.to || q.from <= q.to, { path: ['to'], message: 'The end must be on or after the start.' });

export type AccessQuery = z.infer<typeof accessQuerySchema>;
