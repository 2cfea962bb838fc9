import { z } from 'zod';

/** The longest range one report covers: a year, leap day included. */
export const REPORT_MAX_DAYS = 366;

const isoDay = z
	.string()
	.trim()
	.regex(/^\d{4}-\d{2}-\d{2}$/, 'Enter a date as YYYY-MM-DD.')
	.refine((v) => {
		const t = Date.parse(`${v}T00:00:00Z`);
		return Number.isFinite(t) && new Date(t).toISOString().slice(0, 10) === v;
	}, 'That date does not exist.');

const dayNumber = (day: string) => Date.parse(`${day}T00:00:00Z`) / 86_400_000;

/** Query string of /reports and its CSV exports: ?from=YYYY-MM-DD&to=YYYY-MM-DD&ward=…&ward=… */
export const reportQuerySchema = z
	.object({
		from: isoDay,
		to: isoDay,
		ward: z.array(z.string().trim().min(1).max(120, 'Ward name is too long.')).max(100, 'Choose at most 100 wards.')
	})
	.refine((q) => q.from <= q.to, { path: ['to'], message: 'The end date must be on or after the start date.' })
	.refine((q) => dayNumber(q.to) - dayNumber(q.from) + 1 <= REPORT_MAX_DAYS, {
		path: ['from'],
		message: `Choose a range of at most ${REPORT_MAX_DAYS} days.`
	});
