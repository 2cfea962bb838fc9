import { describe, expect, it } from 'vitest';
import { fieldErrors } from '../../../src/lib/server/http';
import { delayFor, MAX_FAILURES } from '../../../src/lib/server/auth';
import { safeNext, signInSchema, userCreateSchema, userUpdateSchema } from '../../../src/lib/validation/users';

describe('sign-in form', () => {
	it('accepts an e-mail and password', () => {
		expect(signInSchema.safeParse({ email: ' Pharmacist@Larkspur.test ', password: 'x' }).success).toBe(true);
	});
	it('names the field at fault', () => {
		const result = signInSchema.safeParse({ email: 'not-an-address', password: '' });
		expect(result.success).toBe(false);
		if (!result.success) {
			const errors = fieldErrors(result.error);
			expect(errors.email).toMatch(/valid e-mail/);
			expect(errors.password).toMatch(/Enter your password/);
		}
	});
});

describe('user administration forms', () => {
	it('requires a 12-character password and a known role', () => {
		const result = userCreateSchema.safeParse({ email: 'a@larkspur.test', displayName: 'A Person', role: 'surgeon', password: 'short' });
		expect(result.success).toBe(false);
		if (!result.success) {
			const errors = fieldErrors(result.error);
			expect(errors.role).toMatch(/Choose a role/);
			expect(errors.password).toMatch(/at least 12/);
		}
	});
	it('turns the active select into a boolean', () => {
		const parsed = userUpdateSchema.parse({ id: '3f1c2b8e-0a4e-4e59-9a37-2f1f6e7a9b10', role: 'physician', active: 'false' });
		expect(parsed.active).toBe(false);
	});
});

describe('safeNext (no open redirect after sign-in)', () => {
	const origin = 'https://ebbline.hospital.example';
	it.each([
		['/board?ward=ICU', '/board?ward=ICU'],
		['/patients/5b0c9f6e-2d1a-4c3e-9f7a-1b2c3d4e5f60?tab=trend#chart', '/patients/5b0c9f6e-2d1a-4c3e-9f7a-1b2c3d4e5f60?tab=trend#chart'],
		['/flags/../admin/users', '/admin/users'],
		['https://elsewhere.example/', '/'],
		['//elsewhere.example', '/'],
		['/\\elsewhere.example', '/'],
		[null, '/'],
		['', '/']
	])('%s → %s', (input, expected) => {
		expect(safeNext(input, origin)).toBe(expected);
	});

	// each would leave the origin in some browser or after one more decoding step
	it.each([
		'/%09/evil.example',
		'//evil.example',
		'/\\evil.example',
		'https://evil.example',
		'/\t/evil.example',
		'%2F%2Fevil.example',
		'/\n/evil.example',
		'/%5Cevil.example',
		'/%2F/evil.example',
		'/\u0000/evil.example',
		'\t//evil.example',
		'javascript:alert(1)',
		'/%E0%A4%A'
	])('refuses %j', (input) => {
		expect(safeNext(input, origin)).toBe('/');
		expect(new URL(safeNext(input, origin), origin).origin).toBe(origin);
	});
});

describe('sign-in slow-down', () => {
	it('adds no delay for the first failure and grows before the lock', () => {
		expect(delayFor(0)).toBe(0);
		expect(delayFor(1)).toBe(0);
		expect(delayFor(2)).toBeGreaterThan(0);
		expect(delayFor(MAX_FAILURES - 1)).toBeGreaterThan(delayFor(2));
		expect(delayFor(10)).toBeLessThanOrEqual(2000);
	});
});
