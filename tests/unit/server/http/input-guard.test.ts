// What PostgreSQL cannot store in text or jsonb (PostgreSQL documentation, "Character Types" and
// "JSON Types": U+0000 is refused; text must be valid UTF-8, so an unpaired surrogate cannot be
// encoded) and how deep JSON may nest (common practice: far deeper than any FHIR Bundle Ebbline takes).
import { describe, expect, it } from 'vitest';
import { jsonTooDeep, queryStringProblem, unstorableText } from '../../../../src/lib/server/http';

describe('input guard', () => {
	it('names a NUL character, raw or as a JSON escape', () => {
		expect(unstorableText('a\u0000b')).toMatch(/NUL character/);
		expect(unstorableText('{"id":"a\\u0000b"}')).toMatch(/NUL character/);
		expect(unstorableText('plain text, ünïcödé, 💊 and 3 North')).toBeNull();
	});

	it('names an unpaired surrogate, raw or escaped, and lets a paired one through', () => {
		expect(unstorableText('x\ud800y')).toMatch(/unpaired UTF-16 surrogate/);
		expect(unstorableText('{"id":"x\\ud800y"}')).toMatch(/unpaired UTF-16 surrogate/);
		expect(unstorableText('{"id":"\\ud83d\\udc8a"}')).toBeNull(); // 💊 as an escaped pair
	});

	it('measures JSON depth outside strings only', () => {
		expect(jsonTooDeep('['.repeat(64) + ']'.repeat(64))).toBe(false);
		expect(jsonTooDeep('['.repeat(65) + ']'.repeat(65))).toBe(true);
		expect(jsonTooDeep(JSON.stringify({ note: '['.repeat(500) }))).toBe(false);
		expect(jsonTooDeep(JSON.stringify({ note: 'a \\" [[[[' }))).toBe(false);
	});

	it('names the query parameter at fault', () => {
		expect(queryStringProblem(new URL('http://x/api/v1/flags?sort=priority&ward=3%00'))).toEqual({ parameter: 'ward', reason: expect.stringMatching(/NUL/) });
		expect(queryStringProblem(new URL('http://x/api/v1/flags?q=Ashdown%20%E2%80%94%20ICU'))).toBeNull();
	});
});
