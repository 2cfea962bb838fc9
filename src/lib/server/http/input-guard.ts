// Text that PostgreSQL cannot store, or JSON too deep to handle safely, is refused at the door with
// a 400 naming the place, instead of failing later as a 500: a NUL character (text and jsonb refuse
// U+0000), an unpaired UTF-16 surrogate (not valid Unicode, so not valid UTF-8), and JSON nested
// deeper than any message Ebbline takes (deep nesting exhausts the stack of recursive code).
import { json } from '@sveltejs/kit';

export const MAX_JSON_DEPTH = 64;

// eslint-disable-next-line no-control-regex -- finding NUL is this pattern's whole job
const NUL = /\u0000|\\u0000/;
const SURROGATE_ESCAPE = /\\u[dD][89a-fA-F][0-9a-fA-F]{2}/;

/** Why this text cannot be stored, or null. Works on plain text and on JSON source alike. */
export function unstorableText(text: string): string | null {
	if (NUL.test(text)) return 'contains a NUL character (U+0000), which cannot be stored';
	if (!text.isWellFormed()) return 'contains an unpaired UTF-16 surrogate, which is not valid Unicode';
	// in JSON source a lone surrogate can hide behind an escape; decoding the strings shows it
	if (SURROGATE_ESCAPE.test(text)) {
		try {
			let bad = false;
			JSON.parse(text, (_key, value) => {
				if (typeof value === 'string' && !value.isWellFormed()) bad = true;
				return value;
			});
			if (bad) return 'contains an unpaired UTF-16 surrogate escape, which is not valid Unicode';
		} catch {
			// not JSON: the caller reports that
		}
	}
	return null;
}

/** True when JSON source nests arrays or objects deeper than `max` (strings are skipped). */
export function jsonTooDeep(text: string, max = MAX_JSON_DEPTH): boolean {
	let depth = 0;
	let inString = false;
	for (let i = 0; i < text.length; i++) {
		const c = text.charCodeAt(i);
		if (inString) {
			if (c === 92)
				i++; // backslash: skip the escaped character
			else if (c === 34) inString = false;
		} else if (c === 34) inString = true;
		else if (c === 91 || c === 123) {
			if (++depth > max) return true;
		} else if (c === 93 || c === 125) depth--;
	}
	return false;
}

/** The problem with a JSON request body's source, or null. */
export function jsonBodyProblem(text: string): string | null {
	if (jsonTooDeep(text)) return `is nested deeper than ${MAX_JSON_DEPTH} levels`;
	return unstorableText(text);
}

/**
 * Reads a JSON request body for an API route: `{ ok: true, value }`, or a 400 answer naming the body
 * (`{ error, issues: { body } }`, the shape every API route answers with).
 */
export async function readJsonBody(request: Request, label = 'body'): Promise<{ ok: true; value: unknown } | { ok: false; response: Response }> {
	const refuse = (reason: string) => ({ ok: false as const, response: json({ error: `${label}: ${reason}`, issues: { [label]: reason } }, { status: 400 }) });
	const text = await request.text();
	const problem = jsonBodyProblem(text);
	if (problem) return refuse(problem);
	try {
		return { ok: true, value: JSON.parse(text) };
	} catch {
		return refuse('must be valid JSON');
	}
}

/** The first query parameter whose name or value cannot be stored, with the reason; or null. */
export function queryStringProblem(url: URL): { parameter: string; reason: string } | null {
	for (const [name, value] of url.searchParams) {
		const nameReason = unstorableText(name);
		const reason = nameReason ?? unstorableText(value);
		if (reason) return { parameter: nameReason ? 'query string' : name, reason };
	}
	return null;
}
