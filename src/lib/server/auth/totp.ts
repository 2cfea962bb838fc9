import { createTOTPKeyURI, verifyHOTP } from '@oslojs/otp';
import { encodeBase32NoPadding } from '@oslojs/encoding';
import { randomBytes } from 'node:crypto';

/**
 * TOTP as RFC 6238 defines it and authenticator apps expect: HMAC-SHA-1, 6 digits, 30-second steps,
 * through @oslojs/otp's HOTP verification (constant-time). A code is accepted for the step before, the
 * current one and the one after (±30 s of clock drift), and only for a step later than the last
 * accepted one, so a code is never accepted twice.
 */
export const TOTP_PERIOD_S = 30;
export const TOTP_DIGITS = 6;
export const TOTP_ISSUER = 'Ebbline';
/** Steps either side of now that still count: 1 (RFC 6238 section 5.2 recommends at most one). */
export const TOTP_WINDOW_STEPS = 1;

/** A new 160-bit secret (RFC 4226 section 4 recommends 160 bits). */
export function newTotpSecret(): Uint8Array {
	return new Uint8Array(randomBytes(20));
}

export function stepAt(nowMs: number): number {
	return Math.floor(nowMs / 1000 / TOTP_PERIOD_S);
}

/** The secret as authenticator apps take it when typed in: base32 without padding. */
export function secretText(secret: Uint8Array): string {
	return encodeBase32NoPadding(secret);
}

export function keyUri(secret: Uint8Array, accountName: string): string {
	return createTOTPKeyURI(TOTP_ISSUER, accountName, secret, TOTP_PERIOD_S, TOTP_DIGITS);
}

/** Digits only, with any spaces a person typed removed; null when it is not a 6-digit code. */
export function normaliseTotpCode(input: string): string | null {
	const code = input.replace(/\s+/g, '');
	return /^\d{6}$/.test(code) ? code : null;
}

/**
 * The time step a code belongs to (within the window around now and later than `lastStep`), or null
 * when it matches none of them.
 */
export function matchingStep(secret: Uint8Array, code: string, nowMs: number, lastStep: number | null): number | null {
	const now = stepAt(nowMs);
	for (let step = now - TOTP_WINDOW_STEPS; step <= now + TOTP_WINDOW_STEPS; step++) {
		if (lastStep !== null && step <= lastStep) continue;
		if (verifyHOTP(secret, BigInt(step), TOTP_DIGITS, code)) return step;
	}
	return null;
}
