import { describe, expect, it } from 'vitest';
import { applySecurityHeaders, HSTS } from '../../../../src/lib/server/http';

describe('security headers', () => {
	it('sets the hygiene headers on any response, HSTS only over https', () => {
		const plain = new Headers();
		applySecurityHeaders(plain, new URL('http://127.0.0.1:3000/sign-in'), false);
		expect(plain.get('x-content-type-options')).toBe('nosniff');
		expect(plain.get('x-frame-options')).toBe('DENY');
		expect(plain.get('referrer-policy')).toBe('same-origin');
		expect(plain.get('strict-transport-security')).toBeNull();
		expect(plain.get('cache-control')).toBeNull();

		const secure = new Headers({ location: '/sign-in' });
		applySecurityHeaders(secure, new URL('https://ebbline.hospital.example/board'), true);
		expect(secure.get('strict-transport-security')).toBe(HSTS);
		expect(HSTS).toMatch(/^max-age=\d{8}$/);
		expect(secure.get('cache-control')).toBe('no-store');
		expect(secure.get('location')).toBe('/sign-in');
	});
});
