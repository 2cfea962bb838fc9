// Request shapes for the triage board API, shared by the server (validation) and the board page
// (building URLs). Relative imports only: the server modules import this file too.
import { z } from 'zod';
import { HUMAN_OUTCOMES, SEVERITIES, type Severity } from '../domain/vocabulary';

export { SEVERITIES, type Severity };

/**
 * Which flags the board shows. `open` (the default) is the morning worklist: every flag that is not
 * closed and not asleep — a snooze whose time has passed counts as awake even before anything wakes it.
 */
export const BOARD_STATES = ['open', 'new', 'in_review', 'snoozed', 'recommended', 'closed', 'all'] as const;
export type BoardState = (typeof BOARD_STATES)[number];

export const BOARD_SORTS = ['priority', 'age', 'patient', 'ward', 'agent', 'crcl', 'halfLife', 'state'] as const;
export type BoardSort = (typeof BOARD_SORTS)[number];

export const MAX_PAGE_SIZE = 200;
export const DEFAULT_PAGE_SIZE = 50;
/** order ids one board query may name (`order=`) */
export const MAX_ORDERS_PER_QUERY = 200;

const optionalText = (max: number) =>
	z
		.string()
		.trim()
		.max(max, `must be at most ${max} characters`)
		.optional()
		.transform((v) => (v ? v : undefined));

export const boardQuerySchema = z.object({
	ward: optionalText(80),
	severity: z
		.string()
		.optional()
		.transform((v, ctx) => {
			if (!v) return undefined;
			const parts = v
				.split(',')
				.map((s) => s.trim())
				.filter(Boolean);
			for (const p of parts) {
				if (!(SEVERITIES as readonly string[]).includes(p)) {
					ctx.addIssue({ code: 'custom', message: `unknown severity "${p}"; use high, moderate or low (comma-separated)` });
					return z.NEVER;
				}
			}
			return parts as Severity[];
		}),
	rule: optionalText(120),
	agent: optionalText(120),
	state: z.enum(BOARD_STATES, { message: `use one of ${BOARD_STATES.join(', ')}` }).default('open'),
	mine: z
		.enum(['1', 'true', '0', 'false', ''], { message: 'use 1 or 0' })
		.optional()
		.transform((v) => v === '1' || v === 'true'),
	q: optionalText(120),
	/** only the flags of these orders (ids, comma-separated); the answer then also gives each order's newest assessment */
	order: z
		.string()
		.optional()
		.transform((v, ctx) => {
			if (!v) return undefined;
			const ids = [
				...new Set(
					v
						.split(',')
						.map((s) => s.trim().toLowerCase())
						.filter(Boolean)
				)
			];
			if (ids.length > MAX_ORDERS_PER_QUERY) {
				ctx.addIssue({ code: 'custom', message: `at most ${MAX_ORDERS_PER_QUERY} order ids` });
				return z.NEVER;
			}
			const bad = ids.find((id) => !z.uuid().safeParse(id).success);
			if (bad !== undefined) {
				ctx.addIssue({ code: 'custom', message: `"${bad.slice(0, 40)}" is not an order id (UUID)` });
				return z.NEVER;
			}
			return ids.length ? ids.sort() : undefined;
		}),
	sort: z.enum(BOARD_SORTS, { message: `use one of ${BOARD_SORTS.join(', ')}` }).default('priority'),
	dir: z.enum(['asc', 'desc'], { message: 'use asc or desc' }).optional(),
	limit: z.coerce
		.number({ message: 'must be a number' })
		.int('must be a whole number')
		.min(0, 'must be 0 or more')
		.max(MAX_PAGE_SIZE, `must be at most ${MAX_PAGE_SIZE}`)
		.default(DEFAULT_PAGE_SIZE),
	cursor: optionalText(600),
	/** count flags opened after this time instead of listing (the board's "n new" poll) */
	openedAfter: z.iso.datetime({ offset: true, message: 'must be an ISO 8601 date-time' }).optional(),
	facets: z
		.enum(['1', '0', ''], { message: 'use 1 or 0' })
		.optional()
		.transform((v) => v === '1')
});
export type BoardQuery = z.infer<typeof boardQuerySchema>;

/** The default sort direction of each column: most urgent, oldest, lowest or alphabetical first. */
export const DEFAULT_DIR: Record<BoardSort, 'asc' | 'desc'> = {
	priority: 'desc',
	age: 'desc', // oldest first
	patient: 'asc',
	ward: 'asc',
	agent: 'asc',
	crcl: 'asc',
	halfLife: 'desc',
	state: 'asc'
};

const expectedVersion = z.number({ message: 'send the flag version you loaded (a number)' }).int('must be a whole number').min(1, 'must be 1 or more');
const reason = z.string().trim().max(2000, 'must be at most 2000 characters');

/** One pharmacist or administrator action on a flag, as POSTed to /api/v1/flags/[id]/events. */
export const flagEventSchema = z
	.discriminatedUnion(
		'action',
		[
			z.object({ action: z.literal('claim'), expectedVersion }),
			z.object({ action: z.literal('release'), expectedVersion }),
			z.object({ action: z.literal('start_review'), expectedVersion }),
			z.object({
				action: z.literal('snooze'),
				expectedVersion,
				until: z.iso.datetime({ offset: true, message: 'must be an ISO 8601 date-time' }).optional(),
				untilNextResult: z.boolean({ message: 'must be true or false' }).optional()
			}),
			z.object({ action: z.literal('wake'), expectedVersion }),
			z.object({
				action: z.literal('note'),
				expectedVersion,
				note: z.string().trim().min(1, 'write the note first').max(2000, 'must be at most 2000 characters')
			}),
			z.object({
				action: z.literal('close'),
				expectedVersion,
				outcome: z.enum(HUMAN_OUTCOMES, { message: `use one of ${HUMAN_OUTCOMES.join(', ')}` }),
				reason: reason.optional()
			})
		],
		{ message: 'use one of claim, release, start_review, snooze, wake, note, close' }
	)
	.superRefine((body, ctx) => {
		if (body.action === 'snooze') {
			if (body.untilNextResult && body.until) {
				ctx.addIssue({ code: 'custom', path: ['until'], message: 'choose either a time or the next result, not both' });
			} else if (!body.untilNextResult && !body.until) {
				ctx.addIssue({ code: 'custom', path: ['until'], message: 'choose a time to snooze until, or untilNextResult: true' });
			} else if (body.until && new Date(body.until).getTime() <= Date.now()) {
				ctx.addIssue({ code: 'custom', path: ['until'], message: 'must be in the future' });
			}
		}
		if (body.action === 'close' && body.outcome !== 'accepted' && !body.reason) {
			ctx.addIssue({ code: 'custom', path: ['reason'], message: 'give a reason when the outcome is not "accepted"' });
		}
	});
export type FlagEventBody = z.infer<typeof flagEventSchema>;
