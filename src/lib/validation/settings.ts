import { z } from 'zod';

/** How much of the patient an e-mail names: never the full name unless an administrator enables it. */
export const PATIENT_DETAIL = ['initials_mrn_ward', 'full_name'] as const;
export type PatientDetail = (typeof PATIENT_DETAIL)[number];
export const PATIENT_DETAIL_LABELS: Record<PatientDetail, string> = {
	initials_mrn_ward: 'Initials, MRN and ward',
	full_name: 'Full name, MRN and ward'
};

// Five fields (minute hour day-of-month month day-of-week); each a list of *, n or n-m with an optional /step.
const CRON_PART = String.raw`(\*|\d{1,2}(-\d{1,2})?)(\/\d{1,2})?`;
const CRON_FIELD = `${CRON_PART}(,${CRON_PART})*`;
const CRON = new RegExp(`^${CRON_FIELD}( ${CRON_FIELD}){4}$`);

export const cronSchema = z
	.string()
	.trim()
	.transform((v) => v.replace(/\s+/g, ' '))
	.pipe(z.string().regex(CRON, 'Write five cron fields: minute hour day month weekday, e.g. "0 7 * * *" for 07:00 every day.'));

/** Each administrator setting with its default; the settings service stores one row per key. */
export const settingsSchema = z.object({
	emailPatientDetail: z.enum(PATIENT_DETAIL).default('initials_mrn_ward'),
	reminderAfterH: z.number().int().min(1).max(168).default(24),
	tokenLifetimeH: z.number().int().min(1).max(720).default(72),
	digestCron: cronSchema.default('0 7 * * *'),
	/** days a delivered e-mail keeps its text; then the mail.purge job blanks it and keeps the record */
	emailRetentionDays: z.number().int().min(1).max(3650).default(30)
});
export type Settings = z.infer<typeof settingsSchema>;
export type SettingKey = keyof Settings;
export const SETTING_KEYS = Object.keys(settingsSchema.shape) as SettingKey[];

const wholeHours = (label: string, min: number, max: number) =>
	z
		.string()
		.trim()
		.min(1, `Enter the ${label} in hours.`)
		.transform(Number)
		.pipe(
			z
				.number({ message: `The ${label} must be a whole number of hours.` })
				.int(`The ${label} must be a whole number of hours.`)
				.min(min, `The ${label} must be at least ${min} h.`)
				.max(max, `The ${label} must be at most ${max} h.`)
		);

/** The admin form: strings from the browser, validated into typed settings. */
export const settingsFormSchema = z.object({
	emailPatientDetail: z.enum(PATIENT_DETAIL, { message: 'Choose how much patient detail an e-mail carries.' }),
	reminderAfterH: wholeHours('reminder delay', 1, 168),
	tokenLifetimeH: wholeHours('link lifetime', 1, 720),
	digestCron: cronSchema,
	emailRetentionDays: z
		.string()
		.trim()
		.min(1, 'Enter how many days e-mail texts are kept.')
		.transform(Number)
		.pipe(
			z
				.number({ message: 'E-mail texts are kept for a whole number of days.' })
				.int('E-mail texts are kept for a whole number of days.')
				.min(1, 'E-mail texts are kept for at least 1 day.')
				.max(3650, 'E-mail texts are kept for at most 3650 days.')
		)
});
