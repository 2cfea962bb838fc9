import { describe, expect, it } from 'vitest';
import { actionBodyProblem, actionNameProblem, isFormActionPost } from '../../../../src/lib/server/http/form-actions';

const url = (path: string) => new URL(path, 'http://127.0.0.1:3000');
const post = (type: string | null, body: string | undefined) =>
	new Request('http://127.0.0.1:3000/sign-in', { method: 'POST', headers: type ? { 'content-type': type } : {}, body });

describe('form action posts', () => {
	it('tells page actions from endpoint posts', () => {
		expect(isFormActionPost('POST', '/sign-in', url('/sign-in'))).toBe(true);
		expect(isFormActionPost('POST', '/admin/users', url('/admin/users?/create'))).toBe(true);
		expect(isFormActionPost('POST', '/feed/upload/chunk', url('/feed/upload/chunk'))).toBe(false);
		expect(isFormActionPost('POST', '/api/v1/flags/[id]/events', url('/api/v1/flags/x/events'))).toBe(false);
		expect(isFormActionPost('GET', '/sign-in', url('/sign-in'))).toBe(false);
		expect(isFormActionPost('POST', null, url('/nowhere'))).toBe(false);
	});

	it('refuses the reserved name and names every object has, and lets real names through', () => {
		expect(actionNameProblem(url('/sign-in?/default'))).toMatchObject({ status: 404, message: expect.stringContaining("'default'") });
		for (const name of ['constructor', 'toString', '__proto__', 'hasOwnProperty', '', 'a b', '../x']) {
			expect(actionNameProblem(url(`/admin/users?/${encodeURIComponent(name)}`)), name).toMatchObject({ status: 404 });
		}
		expect(actionNameProblem(url('/admin/users?/create'))).toBeNull();
		expect(actionNameProblem(url('/sign-in'))).toBeNull();
		expect(actionNameProblem(url('/sign-in?next=/board'))).toBeNull();
	});

	it('refuses bodies a form action cannot read, naming the content-type', async () => {
		expect(await actionBodyProblem(post('text/plain', 'a=b'))).toMatchObject({ status: 415, message: expect.stringContaining("'text/plain'") });
		expect(await actionBodyProblem(post('application/json', '{}'))).toMatchObject({ status: 415 });
		expect(await actionBodyProblem(post(null, undefined))).toMatchObject({ status: 415, message: expect.stringContaining('missing') });
		expect(await actionBodyProblem(post('multipart/form-data', ''))).toMatchObject({ status: 400, message: expect.stringContaining('multipart') });
		expect(await actionBodyProblem(post('multipart/form-data; boundary=xyz', 'garbage'))).toMatchObject({ status: 400 });
	});

	it('accepts readable form bodies and leaves them readable', async () => {
		const plain = post('application/x-www-form-urlencoded', 'email=a%40b.test');
		expect(await actionBodyProblem(plain)).toBeNull();
		expect((await plain.formData()).get('email')).toBe('a@b.test');
		const form = new FormData();
		form.set('email', 'a@b.test');
		const multipart = new Request('http://127.0.0.1:3000/sign-in', { method: 'POST', body: form });
		expect(await actionBodyProblem(multipart)).toBeNull();
		expect((await multipart.formData()).get('email')).toBe('a@b.test');
		expect(await actionBodyProblem(post('application/x-www-form-urlencoded', undefined))).toBeNull();
	});
});
