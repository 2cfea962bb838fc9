// Starts the project's fake SMTP server (scripts/fake-smtp.ts) on a free loopback port with a private
// mailbox directory, and reads back what it received; mailWorkers() gives a test file one, with the workers.
import { spawn, type ChildProcess } from 'node:child_process';
import { mkdtempSync, readdirSync, readFileSync, rmSync } from 'node:fs';
import { createServer, connect } from 'node:net';
import { tmpdir } from 'node:os';
import path from 'node:path';
import { fileURLToPath } from 'node:url';
import { afterAll, beforeAll } from 'vitest';
import { startWorkers, stopWorkers } from '../../../../jobs/worker';
import { stopBoss } from '../../../../src/lib/server/queue';

const root = fileURLToPath(new URL('../../../..', import.meta.url));

export function freePort(): Promise<number> {
	return new Promise((resolve, reject) => {
		const server = createServer();
		server.once('error', reject);
		server.listen(0, '127.0.0.1', () => {
			const { port } = server.address() as { port: number };
			server.close(() => resolve(port));
		});
	});
}

function portOpen(port: number): Promise<boolean> {
	return new Promise((resolve) => {
		const socket = connect(port, '127.0.0.1');
		socket.once('connect', () => {
			socket.destroy();
			resolve(true);
		});
		socket.once('error', () => resolve(false));
	});
}

export async function waitFor<T>(probe: () => Promise<T | null | undefined | false>, what: string, timeoutMs = 30_000, everyMs = 200): Promise<T> {
	const deadline = Date.now() + timeoutMs;
	for (;;) {
		const value = await probe();
		if (value) return value;
		if (Date.now() > deadline) throw new Error(`timed out waiting for ${what}`);
		await new Promise((r) => setTimeout(r, everyMs));
	}
}

export type Received = { id: string; subject: string; to: string; envelopeTo: string[]; messageId: string | null; text: string; html: string };

export class FakeSmtp {
	child: ChildProcess | null = null;
	readonly mailbox = mkdtempSync(path.join(tmpdir(), 'ebbline-mailbox-'));
	/** 0: a free port is chosen on the first start and kept for restarts */
	constructor(public port = 0) {}

	get url() {
		return `smtp://127.0.0.1:${this.port}`;
	}

	async start() {
		if (!this.port) this.port = await freePort();
		// One process (node with tsx's loader), so stopping it really frees the port.
		this.child = spawn(process.execPath, ['--import', 'tsx', 'scripts/fake-smtp.ts'], {
			cwd: root,
			env: { ...process.env, FAKE_SMTP_PORT: String(this.port), EBBLINE_MAILBOX_DIR: this.mailbox },
			stdio: 'ignore'
		});
		await waitFor(() => portOpen(this.port), `fake SMTP on port ${this.port}`);
	}

	async stop() {
		const child = this.child;
		if (!child || child.exitCode !== null) return;
		const exited = new Promise((resolve) => child.once('exit', resolve));
		child.kill('SIGKILL');
		await exited;
		this.child = null;
		await waitFor(async () => !(await portOpen(this.port)), 'fake SMTP to stop');
	}

	messages(): Received[] {
		return readdirSync(this.mailbox)
			.filter((n) => n.endsWith('.json'))
			.sort()
			.map((n) => JSON.parse(readFileSync(path.join(this.mailbox, n), 'utf8')) as Received);
	}

	byMessageId(messageId: string) {
		return this.messages().filter((m) => m.messageId === messageId);
	}
}

/** The answer link's token from an e-mail's plain-text part. */
export function tokenIn(text: string): string {
	const match = /\/respond\/([A-Za-z0-9_-]{43})\b/.exec(text);
	if (!match) throw new Error('no answer link in the e-mail');
	return match[1];
}

/** The address the e-mails' links point at in these tests. */
export const ORIGIN = 'http://ebbline.larkspur.test';

/**
 * One fake SMTP server and the workers of `queues` for the test file that calls it (at its top level,
 * before its own hooks): started before its tests, with the environment the mailer reads, and stopped
 * after them, the mailbox removed.
 */
export function mailWorkers(queues: string[], options: { schedules?: boolean } = {}): FakeSmtp {
	const smtp = new FakeSmtp();
	beforeAll(async () => {
		process.env.EBBLINE_LOG = 'silent';
		await smtp.start();
		process.env.SMTP_URL = smtp.url;
		process.env.ORIGIN = ORIGIN;
		await startWorkers({ only: queues, schedules: options.schedules });
	});
	afterAll(async () => {
		await stopWorkers();
		await stopBoss();
		await smtp.stop();
		rmSync(smtp.mailbox, { recursive: true, force: true });
	});
	return smtp;
}
