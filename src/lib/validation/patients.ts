// Query of GET /api/v1/patients/[id]/projection: which order, and optionally a regimen the pharmacist
// types in (dose, interval, infusion time). Without one, the assessment's proposed regimen is used.
import { z } from 'zod';

const optionalNumber = (name: string, min: number, max: number, unit: string) =>
	z
		.string()
		.optional()
		.transform((v, ctx) => {
			if (v === undefined || v.trim() === '') return undefined;
			const n = Number(v);
			if (!Number.isFinite(n)) {
				ctx.addIssue({ code: 'custom', message: `${name} must be a number (${unit})` });
				return z.NEVER;
			}
			if (n < min || n > max) {
				ctx.addIssue({ code: 'custom', message: `${name} must be between ${min} and ${max} ${unit}` });
				return z.NEVER;
			}
			return n;
		});

export const projectionQuerySchema = z
	.object({
		order: z.uuid('choose an order of this patient (order id)'),
		dose: optionalNumber('dose', 1, 20000, 'mg'),
		interval: optionalNumber('interval', 1, 168, 'h'),
		infusion: optionalNumber('infusion', 0, 24, 'h')
	})
	.superRefine((q, ctx) => {
		const given = [q.dose, q.interval, q.infusion].filter((v) => v !== undefined).length;
		if (given > 0 && (q.dose === undefined || q.interval === undefined)) {
			ctx.addIssue({
				code: 'custom',
				path: [q.dose === undefined ? 'dose' : 'interval'],
				message: 'give both dose (mg) and interval (h) for a typed-in regimen'
			});
		}
		if (q.infusion !== undefined && q.interval !== undefined && q.infusion > q.interval) {
			ctx.addIssue({ code: 'custom', path: ['infusion'], message: 'infusion time must not exceed the interval' });
		}
	});
export type ProjectionQuery = z.infer<typeof projectionQuerySchema>;
