// The agent editor's form: kinetic parameters and renal dose bands, each checked against a plausible
// range with a message naming the field and its unit. Bands arrive as bands.<i>.<field>.
import { z } from 'zod';

const blankToNull = (v: unknown) => (typeof v === 'string' && v.trim() === '' ? null : v);
const num = (label: string, unit: string, min: number, max: number) =>
	z.coerce
		.number({ error: `${label} must be a number${unit ? ` in ${unit}` : ''}.` })
		.refine(Number.isFinite, { error: `${label} must be a number${unit ? ` in ${unit}` : ''}.`, abort: true })
		.min(min, `${label} must be at least ${min}${unit ? ` ${unit}` : ''}.`)
		.max(max, `${label} must be at most ${max}${unit ? ` ${unit}` : ''}.`);
const optionalNum = (label: string, unit: string, min: number, max: number) => z.preprocess(blankToNull, num(label, unit, min, max).nullable());
const checkbox = z.preprocess((v) => v === 'on' || v === 'true' || v === true, z.boolean());

export const bandSchema = z
	.object({
		minCrclMlMin: optionalNum('Lower CrCl', 'mL/min', 0, 400),
		maxCrclMlMin: optionalNum('Upper CrCl', 'mL/min', 1, 400),
		doseMg: optionalNum('Dose', 'mg', 0.1, 20_000),
		doseMgPerKg: optionalNum('Dose per kg', 'mg/kg', 0.01, 100),
		intervalH: optionalNum('Interval', 'h', 1, 168),
		note: z.preprocess(blankToNull, z.string().trim().max(200, 'Note is too long (200 characters at most).').nullable()),
		avoid: checkbox,
		aucGuided: checkbox
	})
	.superRefine((b, ctx) => {
		if (b.minCrclMlMin !== null && b.maxCrclMlMin !== null && b.maxCrclMlMin <= b.minCrclMlMin) {
			ctx.addIssue({ code: 'custom', path: ['maxCrclMlMin'], message: 'Upper CrCl must be above the lower CrCl.' });
		}
		if (b.doseMg !== null && b.doseMgPerKg !== null) {
			ctx.addIssue({ code: 'custom', path: ['doseMgPerKg'], message: 'Give a dose in mg or in mg/kg, not both.' });
		}
		if (b.aucGuided && (b.doseMg !== null || b.doseMgPerKg !== null || b.avoid)) {
			ctx.addIssue({ code: 'custom', path: ['aucGuided'], message: 'An AUC-guided band has no fixed dose and is not "not recommended".' });
		}
		if ((b.doseMg !== null || b.doseMgPerKg !== null) !== (b.intervalH !== null) && !b.avoid) {
			ctx.addIssue({
				code: 'custom',
				path: ['intervalH'],
				message: 'A band with a dose needs an interval, and an interval needs a dose (or leave both empty for a level-guided band).'
			});
		}
	});

export const agentFormSchema = z
	.object({
		id: z.uuid('Unknown agent.'),
		fe: num('Fraction excreted unchanged (fe)', '', 0, 1),
		proteinBinding: num('Protein binding', '(fraction 0–0.99)', 0, 0.99),
		albuminRefGL: num('Reference albumin', 'g/L', 10, 60),
		vdLPerKg: num('Volume of distribution', 'L/kg', 0.02, 10),
		vdWeightBasis: z.enum(['actual', 'ideal', 'adjusted', 'dosing'], { error: 'Choose the weight the volume is scaled by.' }),
		halfLifeNormalH: num('Half-life with normal renal function', 'h', 0.1, 300),
		model: z.enum(['generic', 'vancomycin', 'aminoglycoside'], { error: 'Choose a population model.' }),
		usualDoseMg: optionalNum('Usual dose', 'mg', 0.1, 20_000),
		usualDoseMgPerKg: optionalNum('Usual dose per kg', 'mg/kg', 0.01, 100),
		usualIntervalH: num('Usual interval', 'h', 1, 168),
		usualInfusionH: num('Usual infusion time', 'h', 0, 24),
		adjustBy: z.enum(['dose', 'interval'], { error: 'Choose how regimens are adjusted: dose or interval.' }),
		troughMaxMgL: optionalNum('Trough limit', 'mg/L', 0.1, 200),
		aucLowMgHL: optionalNum('AUC24 target low', 'mg·h/L', 1, 2000),
		aucHighMgHL: optionalNum('AUC24 target high', 'mg·h/L', 1, 2000),
		loadingTargetMgL: optionalNum('Loading target', 'mg/L', 0.1, 500),
		nephrotoxic: checkbox,
		renallyAdjusted: checkbox,
		maxCreatinineAgeH: num('Creatinine counts while younger than', 'h', 6, 336),
		bioavailability: num('Oral bioavailability', '(fraction 0–1)', 0, 1),
		active: checkbox,
		bands: z.array(bandSchema).max(12, 'At most 12 renal bands.')
	})
	.superRefine((a, ctx) => {
		if (a.usualDoseMg === null && a.usualDoseMgPerKg === null) {
			ctx.addIssue({ code: 'custom', path: ['usualDoseMg'], message: 'Give the usual dose in mg or in mg/kg.' });
		}
		if (a.usualDoseMg !== null && a.usualDoseMgPerKg !== null) {
			ctx.addIssue({ code: 'custom', path: ['usualDoseMgPerKg'], message: 'Give the usual dose in mg or in mg/kg, not both.' });
		}
		if (a.bands.some((b) => b.aucGuided) && (a.aucLowMgHL === null || a.aucHighMgHL === null)) {
			ctx.addIssue({ code: 'custom', path: ['aucLowMgHL'], message: 'An AUC-guided band needs the AUC24 target.' });
		}
		if (a.usualInfusionH > a.usualIntervalH) {
			ctx.addIssue({ code: 'custom', path: ['usualInfusionH'], message: 'The infusion cannot be longer than the interval.' });
		}
		if ((a.aucLowMgHL === null) !== (a.aucHighMgHL === null)) {
			ctx.addIssue({ code: 'custom', path: ['aucHighMgHL'], message: 'Give both ends of the AUC24 target, or neither.' });
		} else if (a.aucLowMgHL !== null && a.aucHighMgHL !== null && a.aucHighMgHL < a.aucLowMgHL) {
			ctx.addIssue({ code: 'custom', path: ['aucHighMgHL'], message: 'AUC24 target high must not be below the low end.' });
		}
	});

export type AgentForm = z.infer<typeof agentFormSchema>;

/** Form values (flat, bands.<i>.<field>) → the nested shape the schema checks. */
export function agentFormInput(values: Record<string, string>): Record<string, unknown> {
	const out: Record<string, unknown> = {};
	const bands: Record<string, string>[] = [];
	for (const [key, value] of Object.entries(values)) {
		const m = /^bands\.(\d+)\.(\w+)$/.exec(key);
		if (m) {
			const i = Number(m[1]);
			if (i < 50) (bands[i] ??= {})[m[2]] = value;
		} else out[key] = value;
	}
	out.bands = bands.filter(Boolean);
	return out;
}

/** Parses the agent form; errors are keyed by the field (bands.1.maxCrclMlMin) with a message naming it. */
export function parseAgentForm(values: Record<string, string>): { ok: true; data: AgentForm } | { ok: false; errors: Record<string, string> } {
	const parsed = agentFormSchema.safeParse(agentFormInput(values));
	if (parsed.success) return { ok: true, data: parsed.data };
	const errors: Record<string, string> = {};
	for (const issue of parsed.error.issues) {
		const key = issue.path.join('.') || 'form';
		const band = /^bands\.(\d+)\./.exec(key);
		errors[key] ??= band ? `Renal band ${Number(band[1]) + 1}: ${issue.message}` : issue.message;
	}
	return { ok: false, errors };
}
