// Reads the local test mailbox (the fake SMTP server's JSON files) for the dev mailbox page and tests.
import { readdir, readFile } from 'node:fs/promises';
import path from 'node:path';

export type MailboxMessage = {
	id: string;
	receivedAt: string;
	envelopeTo: string[];
	from: string;
	to: string;
	subject: string;
	messageId: string | null;
	text: string;
	html: string;
};

const ID = /^[A-Za-z0-9._-]+$/;

/** Newest first. Files that are not complete JSON yet (being written) are skipped. */
export async function listMessages(dir: string, limit = 200): Promise<MailboxMessage[]> {
	let names: string[];
	try {
		names = (await readdir(dir)).filter((n) => n.endsWith('.json'));
	} catch (error) {
		if ((error as NodeJS.ErrnoException).code === 'ENOENT') return [];
		throw error;
	}
	const messages: MailboxMessage[] = [];
	for (const name of names) {
		try {
			messages.push(JSON.parse(await readFile(path.join(dir, name), 'utf8')) as MailboxMessage);
		} catch {
			// a message still being written; it appears on the next load
		}
	}
	return messages.sort((a, b) => b.receivedAt.localeCompare(a.receivedAt) || b.id.localeCompare(a.id)).slice(0, limit);
}

/** One message by id; null for an unknown id or one that could name a path outside the mailbox. */
export async function readMessage(dir: string, id: string): Promise<MailboxMessage | null> {
	if (!ID.test(id)) return null;
	try {
		return JSON.parse(await readFile(path.join(dir, `${id}.json`), 'utf8')) as MailboxMessage;
	} catch {
		return null;
	}
}

export function linksIn(text: string): string[] {
	// a sentence's closing punctuation is not part of the address
	return [...new Set((text.match(/https?:\/\/[^\s<>"')\]]+/g) ?? []).map((link) => link.replace(/[.,;:!?]+$/, '')))];
}
