import { z } from 'zod';
import { CSV_CHUNK_ROWS, CSV_KINDS } from '../feed/csv-format';

/** How long a new feed token lasts, in days; empty means until revoked. */
export const FEED_TOKEN_LIFETIMES_DAYS = [30, 90, 180, 365] as const;

export const feedTokenCreateSchema = z.object({
	name: z.string().trim().min(3, 'Name the system that will use the token (at least 3 characters).').max(80, 'Keep the name under 80 characters.'),
	expiresInDays: z
		.union([z.literal(''), z.enum(FEED_TOKEN_LIFETIMES_DAYS.map(String) as [string, ...string[]], { message: 'Choose one of the listed lifetimes.' })])
		.optional()
		.transform((v) => (v ? Number(v) : null))
});

export const feedTokenRevokeSchema = z.object({ id: z.uuid('Unknown token.') });

/** One chunk of a CSV upload, parsed in the browser; lines count the header as line 1. */
export const csvChunkSchema = z.object({
	kind: z.enum(CSV_KINDS, { message: 'Choose lab results, orders, administrations or levels.' }),
	mode: z.enum(['validate', 'valid-rows', 'all-or-nothing'], { message: 'Choose how to import.' }),
	fileName: z.string().max(255).optional(),
	header: z.array(z.string().max(100)).min(1, 'The file has no header row.').max(60, 'The file has more than 60 columns.'),
	rows: z
		.array(z.object({ line: z.number().int().min(2), values: z.record(z.string(), z.string().max(2000, 'A cell is longer than 2,000 characters.')) }))
		.min(1, 'The file has no data rows.')
		.max(CSV_CHUNK_ROWS, `Send at most ${CSV_CHUNK_ROWS} rows per request.`)
});

export const quarantineReprocessSchema = z.object({
	id: z.uuid('Unknown entry.'),
	raw: z.string().max(200_000, 'The corrected entry is too long.').optional()
});

export const quarantineDiscardSchema = z.object({
	id: z.uuid('Unknown entry.'),
	reason: z.string().trim().min(3, 'Say why the entry is discarded (at least 3 characters).').max(500, 'Keep the reason under 500 characters.')
});

export const quarantineMapAgentSchema = z.object({
	id: z.uuid('Unknown entry.'),
	agentId: z.uuid('Choose an agent from the library.'),
	name: z.string().trim().min(1, 'Give the name to map.').max(120, 'Keep the name under 120 characters.')
});
