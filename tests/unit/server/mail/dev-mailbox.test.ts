// The dev mailbox page exists only while e-mail goes to the local test mailbox.
import { isHttpError } from '@sveltejs/kit';
import { mkdtempSync, rmSync, writeFileSync } from 'node:fs';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { afterEach, describe, expect, it } from 'vitest';
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
const saved = process.env.EBBLINE_MAILBOX_DIR;

afterEach(() => {
	if (saved === undefined) delete process.env.EBBLINE_MAILBOX_DIR;
	else process.env.EBBLINE_MAILBOX_DIR = saved;
});

describe('/dev/mail', () => {
	it('answers 404, saying why, when no test mailbox is in use', async () => {
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
