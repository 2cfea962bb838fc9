import { encodeBase32NoPadding } from '@oslojs/encoding';
import { randomBytes } from 'node:crypto';
import { hashToken } from './tokens';

/** Ten single-use recovery codes of 80 random bits each, shown once as XXXX-XXXX-XXXX-XXXX. */
export const RECOVERY_CODE_COUNT = 10;

export function newRecoveryCode(): string {
	const text = encodeBase32NoPadding(randomBytes(10)); // 16 characters of A–Z and 2–7
	return text.match(/.{4}/g)!.join('-');
}

/** Upper case without the dashes or spaces a person may type; null when it cannot be a recovery code. */
export function normaliseRecoveryCode(input: string): string | null {
	const code = input.replace(/[\s-]+/g, '').toUpperCase();
	return /^[A-Z2-7]{16}$/.test(code) ? code : null;
}

/** Stored only as the SHA-256 hash of the normalised code. */
export function hashRecoveryCode(normalised: string): string {
	return hashToken(normalised);
}
