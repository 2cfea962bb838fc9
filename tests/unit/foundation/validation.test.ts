import { describe, expect, it } from 'vitest';
import { fieldErrors } from '../../../src/lib/server/forms';
import { delayFor, MAX_FAILURES } from '../../../src/lib/server/throttle';
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
	it.each([
		['/board?ward=ICU', '/board?ward=ICU'],
		['https://elsewhere.example/', '/'],
		['//elsewhere.example', '/'],
		['/\\elsewhere.example', '/'],
		[null, '/']
	])('%s → %s', (input, expected) => {
		expect(safeNext(input)).toBe(expected);
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
