import { generateHOTP, verifyHOTP } from '@oslojs/otp';
import { describe, expect, it } from 'vitest';
import { keyUri, matchingStep, normaliseTotpCode, secretText, stepAt } from '../../../../src/lib/server/auth/totp';

// RFC 6238 Appendix B: the SHA-1 seed is the ASCII string "12345678901234567890", 30 s steps, 8 digits
const RFC_SEED = new TextEncoder().encode('12345678901234567890');
const RFC_VECTORS: [timeS: number, code: string][] = [
	[59, '94287082'],
	[1111111109, '07081804'],
	[1111111111, '14050471'],
	[1234567890, '89005924'],
	[2000000000, '69279037'],
	[20000000000, '65353130']
];

describe('TOTP through @oslojs/otp', () => {
	it.each(RFC_VECTORS)('gives the RFC 6238 Appendix B SHA-1 code at T = %i s', (timeS, code) => {
		const step = BigInt(stepAt(timeS * 1000));
		expect(generateHOTP(RFC_SEED, step, 8)).toBe(code);
		expect(verifyHOTP(RFC_SEED, step, 8, code)).toBe(true);
		expect(verifyHOTP(RFC_SEED, step + 1n, 8, code)).toBe(false);
	});

	const secret = new Uint8Array(20).map((_, i) => i + 1);
	const now = 1_700_000_000_000;
	const codeAt = (step: number) => generateHOTP(secret, BigInt(step), 6);

	it('accepts the code of the step before, the current one and the one after, and names the step', () => {
		const current = stepAt(now);
		expect(matchingStep(secret, codeAt(current), now, null)).toBe(current);
		expect(matchingStep(secret, codeAt(current - 1), now, null)).toBe(current - 1);
		expect(matchingStep(secret, codeAt(current + 1), now, null)).toBe(current + 1);
	});

	it('refuses codes two steps away (more than 30 s of drift)', () => {
		const current = stepAt(now);
		expect(matchingStep(secret, codeAt(current - 2), now, null)).toBeNull();
		expect(matchingStep(secret, codeAt(current + 2), now, null)).toBeNull();
	});

	it('refuses a code whose step is not later than the last accepted one (no replay)', () => {
		const current = stepAt(now);
		expect(matchingStep(secret, codeAt(current), now, current)).toBeNull();
		expect(matchingStep(secret, codeAt(current - 1), now, current - 1)).toBeNull();
		// the next step's code is still good after the current one was used
		expect(matchingStep(secret, codeAt(current + 1), now, current)).toBe(current + 1);
	});

	it('refuses a wrong code and another secret’s code', () => {
		const current = stepAt(now);
		const other = new Uint8Array(20).fill(7);
		expect(matchingStep(secret, generateHOTP(other, BigInt(current), 6), now, null)).toBeNull();
		const wrong = codeAt(current) === '000000' ? '000001' : '000000';
		expect(matchingStep(secret, wrong, now, null)).toBeNull();
	});

	it('takes 6 digits with spaces a person typed, and nothing else', () => {
		expect(normaliseTotpCode(' 123 456 ')).toBe('123456');
		expect(normaliseTotpCode('12345')).toBeNull();
		expect(normaliseTotpCode('12345a')).toBeNull();
		expect(normaliseTotpCode('ABCD-EFGH-JKLM-NPQR')).toBeNull();
	});

	it('writes an otpauth URI apps read: issuer, account, base32 secret, SHA1, 6 digits, 30 s', () => {
		const text = keyUri(secret, 'lead@hospital.example');
		expect(text.startsWith('otpauth://totp/Ebbline:lead%40hospital.example?')).toBe(true);
		const uri = new URL(text);
		expect(Object.fromEntries(uri.searchParams)).toEqual({ issuer: 'Ebbline', algorithm: 'SHA1', secret: secretText(secret), period: '30', digits: '6' });
		expect(secretText(secret)).toMatch(/^[A-Z2-7]{32}$/);
	});
});
