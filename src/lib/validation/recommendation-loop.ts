import { z } from 'zod';
import { ANSWERS } from '../domain/vocabulary';

/** Withdrawing a recommendation by hand: the reason is shown to the physician if they open the link. */
export const withdrawSchema = z.object({
	id: z.uuid('Choose the recommendation to withdraw.'),
	reason: z.string().trim().min(3, 'Give the reason for withdrawing (at least 3 characters).').max(500, 'The reason is too long (at most 500 characters).')
});

/** Resending an undeliverable e-mail, to the same or a corrected address. */
export const resendSchema = z.object({
	id: z.uuid('Choose the e-mail to resend.'),
	to: z
		.string()
		.trim()
		.min(1, 'Enter the address to send to.')
		.max(320, 'The address is too long.')
		.pipe(z.email('The address is not an e-mail address (name@example.org).'))
});

/**
 * The physician's answer taken by telephone: the outcome, and a note (required unless accepted — the
 * reason for declining, or the regimen the physician chose instead).
 */
export const phoneAnswerSchema = z
	.object({
		id: z.uuid('Choose the e-mail whose recommendation was answered.'),
		outcome: z.enum(ANSWERS, { message: 'Choose what the physician answered: accepted, modified or declined.' }),
		note: z.string().trim().max(1000, 'The note is too long (at most 1000 characters).').default('')
	})
	.superRefine((value, ctx) => {
		if (value.outcome !== 'accepted' && value.note.length < 3) {
			ctx.addIssue({
				code: 'custom',
				path: ['note'],
				message:
					value.outcome === 'declined'
						? 'Write the reason the physician gave for declining (at least 3 characters).'
						: 'Write the regimen the physician chose instead (at least 3 characters).'
			});
		}
	});

export type PhoneAnswer = { outcome: 'accepted' | 'modified' | 'declined'; note: string };
