import { afterEach, describe, expect, it } from 'vitest';
import { mustEnrolFirst } from '../../../../src/lib/server/auth/access';
import { hashRecoveryCode, newRecoveryCode, normaliseRecoveryCode, RECOVERY_CODE_COUNT } from '../../../../src/lib/server/auth/recovery-codes';
import { decryptSecret, encryptSecret } from '../../../../src/lib/server/auth/totp-key';
import { ConfigError } from '../../../../src/lib/server/config';

const KEY = Buffer.alloc(32, 9).toString('base64');
const before = process.env.EBBLINE_TOTP_KEY;
afterEach(() => {
	if (before === undefined) delete process.env.EBBLINE_TOTP_KEY;
	else process.env.EBBLINE_TOTP_KEY = before;
});

describe('recovery codes', () => {
	it('are 80 random bits shown as four groups of four, and differ', () => {
		const codes = Array.from({ length: RECOVERY_CODE_COUNT }, newRecoveryCode);
		for (const code of codes) expect(code).toMatch(/^[A-Z2-7]{4}(-[A-Z2-7]{4}){3}$/);
		expect(new Set(codes).size).toBe(RECOVERY_CODE_COUNT);
	});

	it('are read however a person types them, and kept only as a SHA-256 hash', () => {
		const code = newRecoveryCode();
		const typed = ` ${code.toLowerCase().replaceAll('-', ' ')} `;
		expect(normaliseRecoveryCode(typed)).toBe(code.replaceAll('-', ''));
		expect(hashRecoveryCode(normaliseRecoveryCode(typed)!)).toMatch(/^[0-9a-f]{64}$/);
		expect(hashRecoveryCode(normaliseRecoveryCode(typed)!)).not.toContain(code.replaceAll('-', '').toLowerCase());
		expect(normaliseRecoveryCode('123456')).toBeNull();
		expect(normaliseRecoveryCode('ABCD-EFGH-JKLM-NPQ1')).toBeNull();
	});
});

describe('secrets at rest', () => {
	it('round-trip under EBBLINE_TOTP_KEY and do not decrypt for another user or another key', () => {
		process.env.EBBLINE_TOTP_KEY = KEY;
		const secret = new Uint8Array(20).map((_, i) => i * 3);
		const stored = encryptSecret(secret, 'user-a');
		expect(stored).toMatch(/^v1\./);
		expect(Buffer.from(decryptSecret(stored, 'user-a'))).toEqual(Buffer.from(secret));
		expect(encryptSecret(secret, 'user-a')).not.toBe(stored); // a fresh IV each time
		expect(() => decryptSecret(stored, 'user-b')).toThrow();
		process.env.EBBLINE_TOTP_KEY = Buffer.alloc(32, 1).toString('base64');
		expect(() => decryptSecret(stored, 'user-a')).toThrow();
	});

	it('name the missing or malformed key', () => {
		delete process.env.EBBLINE_TOTP_KEY;
		expect(() => encryptSecret(new Uint8Array(20), 'u')).toThrow(ConfigError);
		expect(() => encryptSecret(new Uint8Array(20), 'u')).toThrow(/EBBLINE_TOTP_KEY is not set/);
		process.env.EBBLINE_TOTP_KEY = 'c2hvcnQ=';
		expect(() => encryptSecret(new Uint8Array(20), 'u')).toThrow(/32 bytes/);
	});
});

describe('an administrator without a required second factor', () => {
	const locals = (role: App.SessionUser['role'], secondFactor: boolean): App.Locals => ({
		denied: false,
		requestId: 't',
		sessionId: 's',
		user: { id: 'u', email: `${role}@larkspur.test`, displayName: role, role },
		feedToken: null,
		secondFactor
	});

	it('may reach only the set-up page, signing out and the health check', () => {
		const admin = locals('admin', false);
		for (const route of ['/', '/admin/users', '/board', '/api/v1/flags', '/admin/audit', null]) expect(mustEnrolFirst(admin, route, true)).toBe(true);
		for (const route of ['/account/security', '/sign-out', '/health']) expect(mustEnrolFirst(admin, route, true)).toBe(false);
	});

	it('is not held once enrolled, when the requirement is off, or when not an administrator', () => {
		expect(mustEnrolFirst(locals('admin', true), '/admin/users', true)).toBe(false);
		expect(mustEnrolFirst(locals('admin', false), '/admin/users', false)).toBe(false);
		expect(mustEnrolFirst(locals('pharmacist', false), '/board', true)).toBe(false);
		expect(mustEnrolFirst({ ...locals('admin', false), user: null }, '/board', true)).toBe(false);
	});
});
