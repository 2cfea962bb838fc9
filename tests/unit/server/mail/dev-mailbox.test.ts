// The dev mailbox page exists only with the development flag EBBLINE_DEV_MAILBOX=on, and only while
// e-mail goes to the local test mailbox.
import { isHttpError } from '@sveltejs/kit';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
import { navFor } from '../../../../src/lib/navigation';
import { isRouteSwitchedOff } from '../../../../src/lib/server/auth/access';
import { linksIn, listMessages, readMessage } from '../../../../src/lib/server/mail';
import { load } from '../../../../src/routes/dev/mail/+page.server';

const admin = {
	requestId: 'r',
	user: { id: 'a', email: 'admin@larkspur.test', displayName: 'Admin', role: 'admin' },
	sessionId: 's',
	feedToken: null,
	denied: false
} as App.Locals;
const call = (url: string) => (load as unknown as (e: unknown) => Promise<unknown>)({ locals: admin, url: new URL(url) });
const saved = { dir: process.env.EBBLINE_MAILBOX_DIR, flag: process.env.EBBLINE_DEV_MAILBOX };
const restore = (name: string, value: string | undefined) => {
	if (value === undefined) delete process.env[name];
	else process.env[name] = value;
};

afterEach(() => {
	restore('EBBLINE_MAILBOX_DIR', saved.dir);
	restore('EBBLINE_DEV_MAILBOX', saved.flag);
});

describe('/dev/mail without the development flag', () => {
	it('answers 404 to an administrator even with a test mailbox configured, and the nav has no Mailbox', async () => {
		const dir = mkdtempSync(path.join(tmpdir(), 'ebbline-devmail-'));
		try {
			process.env.EBBLINE_MAILBOX_DIR = dir;
			for (const flag of [undefined, 'off', '1', 'true']) {
				restore('EBBLINE_DEV_MAILBOX', flag);
				expect(isRouteSwitchedOff('/dev/mail')).toBe(true);
				const error: unknown = await call('http://x/dev/mail').catch((e: unknown) => e);
				if (!isHttpError(error)) throw new Error(`expected an HTTP error with EBBLINE_DEV_MAILBOX=${flag}`);
				expect(error.status).toBe(404);
				expect(error.body.message).toBe('Page not found.');
			}
			expect(isRouteSwitchedOff('/admin/mail')).toBe(false);
			expect(navFor('admin').map((i) => i.href)).not.toContain('/dev/mail');
			expect(navFor('admin').map((i) => i.href)).toContain('/admin/mail');
		} finally {
			rmSync(dir, { recursive: true, force: true });
		}
	});

	it('answers 404 to a visitor who is not signed in, instead of sending them to sign in', async () => {
		delete process.env.EBBLINE_DEV_MAILBOX;
		const anonymous = { ...admin, user: null, sessionId: null } as App.Locals;
		const error: unknown = await (load as unknown as (e: unknown) => Promise<unknown>)({ locals: anonymous, url: new URL('http://x/dev/mail') }).catch(
			(e: unknown) => e
		);
		expect(isHttpError(error) && error.status).toBe(404);
	});
});

describe('/dev/mail with EBBLINE_DEV_MAILBOX=on', () => {
	it('is listed for administrators only', () => {
		process.env.EBBLINE_DEV_MAILBOX = 'on';
		expect(isRouteSwitchedOff('/dev/mail')).toBe(false);
		expect(navFor('admin', { devMailbox: true }).map((i) => i.label)).toContain('Mailbox');
		for (const role of ['pharmacist', 'physician'] as const) expect(navFor(role, { devMailbox: true }).map((i) => i.href)).not.toContain('/dev/mail');
	});

	it('answers 404, saying why, when no test mailbox is in use', async () => {
		process.env.EBBLINE_DEV_MAILBOX = 'on';
		delete process.env.EBBLINE_MAILBOX_DIR;
		const error: unknown = await call('http://x/dev/mail').catch((e: unknown) => e);
		if (!isHttpError(error)) throw new Error('expected an HTTP error');
		expect(error.status).toBe(404);
		expect(error.body.message).toContain('not in use');
	});

	it('lists messages newest first, opens one, and refuses ids that could leave the mailbox', async () => {
		const dir = mkdtempSync(path.join(tmpdir(), 'ebbline-devmail-'));
		try {
			const write = (id: string, at: string, subject: string) =>
				writeFileSync(
					path.join(dir, `${id}.json`),
					JSON.stringify({
						id,
						receivedAt: at,
						envelopeTo: ['p@larkspur.test'],
						from: 'e',
						to: 'p@larkspur.test',
						subject,
						messageId: null,
						text: `see http://h/respond/${'x'.repeat(43)} now`,
						html: '<p>hi</p>'
					})
				);
			write('100-1-1', '2026-03-10T07:00:00.000Z', 'older');
			write('200-1-2', '2026-03-10T08:00:00.000Z', 'newer');
			writeFileSync(path.join(dir, '300-1-3.json'), '{"half');
			expect((await listMessages(dir)).map((m) => m.subject)).toEqual(['newer', 'older']);
			expect(await readMessage(dir, '../etc/passwd')).toBeNull();
			expect((await readMessage(dir, '100-1-1'))?.subject).toBe('older');
			expect(linksIn('a http://h/respond/abc, and https://x.test/b.')).toEqual(['http://h/respond/abc', 'https://x.test/b']);
			process.env.EBBLINE_MAILBOX_DIR = dir;
			process.env.EBBLINE_DEV_MAILBOX = 'on';
			const data = (await call('http://x/dev/mail')) as { messages: { subject: string }[]; selected: { subject: string; links: string[] } };
			expect(data.messages.map((m) => m.subject)).toEqual(['newer', 'older']);
			expect(data.selected.subject).toBe('newer');
			expect(data.selected.links).toEqual([`http://h/respond/${'x'.repeat(43)}`]);
			const missing = await call('http://x/dev/mail?m=..%2F..%2Fsecret').catch((e) => e);
			expect(isHttpError(missing) && missing.status).toBe(404);
		} finally {
			rmSync(dir, { recursive: true, force: true });
		}
	});
});
