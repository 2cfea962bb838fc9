// Outbound e-mail: an outbox row per message, delivered by the mail.send job through nodemailer.
//
// Exactly one e-mail per outbox row, even when the job is retried:
// - the row is enqueued with its job in one transaction (no row without a job, no job without a row);
// - delivery locks the row (SELECT … FOR UPDATE) for the whole SMTP exchange, so two workers (a retry
//   that overtook a slow attempt, or a job re-fetched after expiry) cannot send it at the same time;
// - a row already marked 'sent' is never sent again;
// - the SMTP acceptance and the 'sent' mark commit together right after the relay answers 250.
// The window that remains: if the process dies, or the database commit fails, after the relay has
// accepted the message but before the commit, the row is still 'queued'/'failed' and the retry sends it
// again. Every copy carries the same Message-ID (derived from the outbox id), so mail systems that
// de-duplicate by Message-ID show it once; SMTP itself offers no way to ask a relay "did you already
// accept this?", so this gap cannot be closed from our side without risking a lost e-mail instead.
import { eq } from 'drizzle-orm';
import { createTransport } from 'nodemailer';
import { config, requireEnv } from './config';
import { getDb, type DbOrTx } from './db';
import { outboundEmails } from './db/schema';
import { logger } from './logger';
import { getBoss, inTransaction, QUEUES } from './queue';

export type OutgoingEmail = {
	to: string;
	subject: string;
	html: string;
	text: string;
	relatedType: 'recommendation' | 'reminder' | 'digest' | 'account_setup';
	relatedId: string;
};

type Transport = { sendMail(message: Record<string, unknown>): Promise<{ messageId: string; response?: string }> };

let cached: { url: string; transport: Transport } | undefined;

/** The SMTP transport for SMTP_URL; fails fast, naming SMTP_URL, when it is not set. */
export function getTransport(): Transport {
	const url = requireEnv('SMTP_URL');
	if (cached?.url !== url) {
		// Short timeouts: the outbox row stays locked while the relay answers, and a relay that is down
		// should fail this attempt quickly and leave the retry to pg-boss's backoff.
		const transport = createTransport({ url, connectionTimeout: 10_000, greetingTimeout: 10_000, socketTimeout: 30_000 });
		cached = { url, transport: transport as unknown as Transport };
	}
	return cached.transport;
}

function fromDomain(): string {
	const match = /@([^>\s]+)>?\s*$/.exec(config.mailFrom);
	return match?.[1] ?? 'localhost';
}

/** The same Message-ID on every attempt for one outbox row, so a duplicate can be recognised downstream. */
export function messageIdFor(outboxId: string): string {
	return `<${outboxId}.outbox@${fromDomain()}>`;
}

/** Writes the outbox row and enqueues its mail.send job inside the caller's transaction. */
export async function queue(tx: DbOrTx, email: OutgoingEmail): Promise<string> {
	const [row] = await tx
		.insert(outboundEmails)
		.values({ toAddress: email.to, subject: email.subject, html: email.html, text: email.text, relatedType: email.relatedType, relatedId: email.relatedId })
		.returning({ id: outboundEmails.id });
	const boss = await getBoss();
	const jobId = await boss.send(QUEUES.mailSend, { outboxId: row.id }, { db: inTransaction(tx) });
	if (!jobId) throw new Error(`The ${QUEUES.mailSend} queue did not accept the job for outbox row ${row.id}.`);
	return row.id;
}

// Answer links are single-use secrets: once the relay has the message, the stored copy keeps no usable link.
const ANSWER_LINK = /\/respond\/[A-Za-z0-9_-]{16,}/g;
const ACCOUNT_SETUP_LINK = /\/account\/setup\/[A-Za-z0-9_-]{16,}/g;
export function redactLinks(body: string): string {
	return body.replace(ANSWER_LINK, '/respond/[link removed after delivery]').replace(ACCOUNT_SETUP_LINK, '/account/setup/[link removed after delivery]');
}

export class DeliveryError extends Error {}

export type DeliveryResult = 'sent' | 'already_sent' | 'missing';

/**
 * Delivers one outbox row (the mail.send job's work). Throws DeliveryError when the relay refuses or
 * cannot be reached, after recording the attempt and the error on the row, so pg-boss retries it.
 */
export async function deliver(outboxId: string, transport: Transport = getTransport()): Promise<DeliveryResult> {
	const outcome = await getDb().transaction(async (tx) => {
		const [row] = await tx.select().from(outboundEmails).where(eq(outboundEmails.id, outboxId)).for('update');
		if (!row) return { kind: 'missing' as const };
		if (row.status === 'sent') return { kind: 'already_sent' as const };
		const attempts = row.attempts + 1;
		const messageId = messageIdFor(row.id);
		let info: { messageId: string };
		try {
			info = await transport.sendMail({ from: config.mailFrom, to: row.toAddress, subject: row.subject, html: row.html, text: row.text, messageId });
		} catch (error) {
			const message = error instanceof Error ? error.message : String(error);
			await tx.update(outboundEmails).set({ status: 'failed', attempts, lastError: message.slice(0, 1000) }).where(eq(outboundEmails.id, row.id));
			return { kind: 'failed' as const, message };
		}
		await tx
			.update(outboundEmails)
			.set({ status: 'sent', attempts, lastError: null, smtpMessageId: info.messageId ?? messageId, sentAt: new Date(), html: redactLinks(row.html), text: redactLinks(row.text) })
			.where(eq(outboundEmails.id, row.id));
		return { kind: 'sent' as const };
	});
	if (outcome.kind === 'failed') {
		logger.warn('e-mail not delivered; will retry', { outboxId, error: outcome.message });
		throw new DeliveryError(`E-mail ${outboxId} not delivered: ${outcome.message}`);
	}
	if (outcome.kind === 'missing') logger.warn('outbox row not found', { outboxId });
	return outcome.kind;
}
