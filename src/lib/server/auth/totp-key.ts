import { createCipheriv, createDecipheriv, randomBytes } from 'node:crypto';
import { ConfigError } from '../config';

/**
 * TOTP secrets are kept encrypted with AES-256-GCM under EBBLINE_TOTP_KEY (32 random bytes, base64:
 * `openssl rand -base64 32`). `npm start` makes one in .data/totp.key; `npm run serve` refuses to
 * start without one. The user's id is the additional data, so a secret copied onto another user's
 * row does not decrypt.
 */
const VERSION = 'v1';

export function totpKey(): Buffer {
	const raw = process.env.EBBLINE_TOTP_KEY;
	if (!raw) {
		throw new ConfigError(
			'Missing configuration: EBBLINE_TOTP_KEY is not set; set it to 32 random bytes in base64 (openssl rand -base64 32) — it encrypts second-factor secrets.'
		);
	}
	const key = Buffer.from(raw, 'base64');
	if (key.length !== 32) throw new ConfigError('Invalid configuration: EBBLINE_TOTP_KEY must be 32 bytes in base64 (openssl rand -base64 32).');
	return key;
}

export function encryptSecret(secret: Uint8Array, userId: string): string {
	const iv = randomBytes(12);
	const cipher = createCipheriv('aes-256-gcm', totpKey(), iv);
	cipher.setAAD(Buffer.from(userId));
	const sealed = Buffer.concat([cipher.update(secret), cipher.final()]);
	return [VERSION, iv.toString('base64url'), cipher.getAuthTag().toString('base64url'), sealed.toString('base64url')].join('.');
}

export function decryptSecret(stored: string, userId: string): Uint8Array {
	const [version, iv, tag, sealed] = stored.split('.');
	if (version !== VERSION || !iv || !tag || !sealed) throw new Error('The stored second-factor secret is not in a known format.');
	const decipher = createDecipheriv('aes-256-gcm', totpKey(), Buffer.from(iv, 'base64url'));
	decipher.setAAD(Buffer.from(userId));
	decipher.setAuthTag(Buffer.from(tag, 'base64url'));
	return new Uint8Array(Buffer.concat([decipher.update(Buffer.from(sealed, 'base64url')), decipher.final()]));
}
