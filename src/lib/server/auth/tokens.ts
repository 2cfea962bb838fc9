import { createHash, randomBytes, timingSafeEqual } from 'node:crypto';

/** A random, URL-safe secret (default 32 bytes = 256 bits). */
export function randomToken(bytes = 32): string {
	return randomBytes(bytes).toString('base64url');
}

/** Tokens are stored only as their SHA-256 hash. */
export function hashToken(token: string): string {
	return createHash('sha256').update(token).digest('hex');
}

export function sameHash(a: string, b: string): boolean {
	const left = Buffer.from(a);
	const right = Buffer.from(b);
	return left.length === right.length && timingSafeEqual(left, right);
}
