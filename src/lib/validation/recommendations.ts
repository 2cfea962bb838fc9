import { z } from 'zod';

/** A number typed in a form field, with its unit named in every message. */
function amount(label: string, unit: string, opts: { min: number; max: number; minInclusive?: boolean }) {
	const range = `${opts.minInclusive ? 'from' : 'above'} ${opts.min} and at most ${opts.max} ${unit}`;
	const number = z.number({ message: `The ${label} must be a number in ${unit}.` });
	return z
		.string()
		.trim()
		.min(1, `Enter the ${label} in ${unit}.`)
		.transform(Number)
		.pipe(
			(opts.minInclusive ? number.min(opts.min, `The ${label} must be ${range}.`) : number.gt(opts.min, `The ${label} must be ${range}.`)).max(
				opts.max,
				`The ${label} must be ${range}.`
			)
		);
}

const optionalAmount = (label: string, unit: string, max: number) => z.union([z.literal('').transform(() => null), amount(label, unit, { min: 0, max })]);

/** Limits that catch a slipped digit without second-guessing a clinician (common practice). */
export const REGIMEN_LIMITS = { doseMg: 20_000, intervalH: 168, infusionH: 24 } as const;

export const regimenShape = {
	doseMg: amount('dose', 'mg', { min: 0, max: REGIMEN_LIMITS.doseMg }),
	intervalH: amount('dosing interval', 'h', { min: 0, max: REGIMEN_LIMITS.intervalH }),
	infusionH: amount('infusion time', 'h', { min: 0, max: REGIMEN_LIMITS.infusionH, minInclusive: true }),
	loadingDoseMg: optionalAmount('loading dose', 'mg', REGIMEN_LIMITS.doseMg)
};

function infusionFits(value: { intervalH: number; infusionH: number }, ctx: z.RefinementCtx) {
	if (value.infusionH > value.intervalH) {
		ctx.addIssue({ code: 'custom', path: ['infusionH'], message: 'The infusion must end before the next dose: make it no longer than the dosing interval.' });
	}
}

/**
 * Who receives a recommendation: `prescriber:<id>` (a prescriber in the directory, reached by e-mail
 * with no account needed) or `physician:<id>` (a physician's Ebbline account). A bare `physicianId`
 * is read as the latter.
 */
export const RECIPIENT = /^(prescriber|physician):([0-9a-f-]{36})$/i;
export type Recipient = { kind: 'prescriber' | 'physician'; id: string };

export const composeSchema = z
	.object({
		...regimenShape,
		recipient: z.string().trim().regex(RECIPIENT, 'Choose who receives the recommendation.').optional(),
		physicianId: z.uuid('Choose the physician who receives the recommendation.').optional(),
		message: z
			.string()
			.trim()
			.min(10, 'Write the message to the physician (at least 10 characters).')
			.max(4000, 'The message is too long (at most 4000 characters).'),
		version: z.coerce.number().int().positive()
	})
	.superRefine(infusionFits)
	.superRefine((value, ctx) => {
		if (!value.recipient && !value.physicianId) ctx.addIssue({ code: 'custom', path: ['recipient'], message: 'Choose who receives the recommendation.' });
	});
export type ComposeInput = z.infer<typeof composeSchema>;

/** The recipient a compose form names. */
export function recipientOf(input: Pick<ComposeInput, 'recipient' | 'physicianId'>): Recipient {
	const m = input.recipient ? RECIPIENT.exec(input.recipient) : null;
	if (m) return { kind: m[1].toLowerCase() as Recipient['kind'], id: m[2].toLowerCase() };
	return { kind: 'physician', id: input.physicianId! };
}

export const acceptSchema = z.object({});

export const modifySchema = z
	.object({
		...regimenShape,
		note: z.string().trim().max(1000, 'The note is too long (at most 1000 characters).').default('')
	})
	.superRefine(infusionFits);

export const declineSchema = z.object({
	reason: z.string().trim().min(3, 'Give a reason for declining (at least 3 characters).').max(1000, 'The reason is too long (at most 1000 characters).')
});

export type Answer =
	| { outcome: 'accepted' }
	| { outcome: 'modified'; regimen: { doseMg: number; intervalH: number; infusionH: number; loadingDoseMg: number | null }; note: string }
	| { outcome: 'declined'; reason: string };
