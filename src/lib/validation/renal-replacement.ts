// The patient page's renal replacement form: a pharmacist sets the modality and since when, or clears
// it, always with a reason (kept in the audit log).
import { z } from 'zod';
import { RENAL_REPLACEMENT_MODES } from '../clinical/types';

/** A local date-time as <input type="datetime-local"> sends it, read in the hospital's time zone. */
const localMoment = z
	.string({ error: 'Enter the date and time.' })
	.trim()
	.regex(/^\d{4}-\d{2}-\d{2}T\d{2}:\d{2}(:\d{2})?$/, 'Enter a date and time as YYYY-MM-DDTHH:MM.')
	.refine((v) => Number.isFinite(Date.parse(`${v}Z`)), 'That date does not exist.');

const reason = z
	.string({ error: 'Give a reason.' })
	.trim()
	.min(3, 'Give a reason (at least 3 characters), e.g. "started on the renal unit today".')
	.max(500, 'The reason is too long (500 characters at most).');

export const renalReplacementSetSchema = z.object({
	mode: z.enum(RENAL_REPLACEMENT_MODES, { error: 'Choose intermittent haemodialysis, peritoneal dialysis or CRRT.' }),
	since: localMoment,
	reason
});

export const renalReplacementClearSchema = z.object({ reason });

export type RenalReplacementSet = z.infer<typeof renalReplacementSetSchema>;

/** The patient page's "therapy restarted" button: which order. */
export const orderRestartSchema = z.object({ orderId: z.uuid('Unknown order.') });
