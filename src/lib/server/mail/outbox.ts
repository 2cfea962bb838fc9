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
import { eq, sql } from 'drizzle-orm';
import { createTransport } from 'nodemailer';
import { config, ConfigError, requireEnv } from '../config';
import { getDb, type DbOrTx } from '../db';
import { outboundEmails, recommendations } from '../db/schema';
import { logger } from '../logger';
import { notify } from '../notifications';
import { QUEUES, send } from '../queue';

export type OutgoingEmail = {
	to: string;
	subject: string;
	html: string;
	text: string;
	relatedType: 'recommendation' | 'reminder' | 'digest' | 'account_setup' | 'answer_code';
	relatedId: string;
	/** when it was written (the database's clock when absent; a replayed history passes its own) */
	at?: Date;
};

type Transport = { sendMail(message: Record<string, unknown>): Promise<{ messageId: string; response?: string }> };

let cached: { key: string; transport: Transport } | undefined;

/**
 * nodemailer's options for SMTP_URL. With SMTP_REQUIRE_TLS=on the message never travels in clear: an
 * smtps:// URL is TLS from the first byte, and a plain smtp:// one must upgrade with STARTTLS
 * (requireTLS: nodemailer refuses to send when the relay does not offer it). A URL that switches TLS
 * off (ignoreTLS) or a value other than on/off is refused at once, naming the variable.
 */
export function transportOptions(url: string, requireTls = process.env.SMTP_REQUIRE_TLS ?? 'off') {
	if (requireTls !== 'on' && requireTls !== 'off') throw new ConfigError(`Invalid configuration: SMTP_REQUIRE_TLS=${requireTls}; set it to on or off.`);
	// Short timeouts: the outbox row stays locked while the relay answers, and a relay that is down
	// should fail this attempt quickly and leave the retry to pg-boss's backoff.
	const base = { url, connectionTimeout: 10_000, greetingTimeout: 10_000, socketTimeout: 30_000 };
	if (requireTls === 'off') return base;
	const parsed = new URL(url);
	if (/^(1|true|yes)$/i.test(parsed.searchParams.get('ignoreTLS') ?? ''))
		throw new ConfigError('Invalid configuration: SMTP_REQUIRE_TLS=on, but SMTP_URL switches TLS off (ignoreTLS); remove it or set SMTP_REQUIRE_TLS=off.');
	if (parsed.protocol === 'smtps:') return { ...base, secure: true };
	if (parsed.protocol === 'smtp:') return { ...base, requireTLS: true };
	throw new ConfigError(`Invalid configuration: SMTP_URL must start with smtp:// or smtps:// when SMTP_REQUIRE_TLS=on.`);
}

/** The SMTP transport for SMTP_URL; fails fast, naming SMTP_URL (or SMTP_REQUIRE_TLS), when it cannot be used. */
export function getTransport(): Transport {
	const url = requireEnv('SMTP_URL');
	const key = `${url} ${process.env.SMTP_REQUIRE_TLS ?? ''}`;
	if (cached?.key !== key) {
		const transport = createTransport(transportOptions(url));
		cached = { key, transport: transport as unknown as Transport };
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
		.values({
			toAddress: email.to,
			subject: email.subject,
			html: email.html,
			text: email.text,
			relatedType: email.relatedType,
			relatedId: email.relatedId,
			...(email.at ? { createdAt: email.at, updatedAt: email.at } : {})
		})
		.returning({ id: outboundEmails.id });
	// send() throws if pg-boss does not accept the job, and the row is rolled back with it
	await send(QUEUES.mailSend, { outboxId: row.id }, { tx });
	return row.id;
}

// Answer links are single-use secrets: once the relay has the message, the stored copy keeps no usable link.
const ANSWER_LINK = /\/respond\/[A-Za-z0-9_-]{16,}/g;
const ACCOUNT_SETUP_LINK = /\/account\/setup\/[A-Za-z0-9_-]{16,}/g;
export function redactLinks(body: string): string {
	return body.replace(ANSWER_LINK, '/respond/[link removed after delivery]').replace(ACCOUNT_SETUP_LINK, '/account/setup/[link removed after delivery]');
}
// A confirmation code is a secret too; its e-mail carries no other number of six digits.
const SIX_DIGITS = /\b\d{6}\b/g;
export function redactSecrets(body: string, relatedType: string | null): string {
	const redacted = redactLinks(body);
	return relatedType === 'answer_code' ? redacted.replace(SIX_DIGITS, '[code removed after delivery]') : redacted;
}

export class DeliveryError extends Error {}

export type DeliveryResult = 'sent' | 'already_sent' | 'missing' | 'undeliverable';

/**
 * A refusal no retry can cure: the relay answered with a permanent (5xx) SMTP reply, e.g. 550 for an
 * unknown mailbox. Timeouts, refused connections and 4xx replies are temporary.
 */
export function isPermanentRefusal(error: unknown): boolean {
	const code = (error as { responseCode?: unknown } | null)?.responseCode;
	return typeof code === 'number' && code >= 500 && code < 600;
}

/** Where an attempt stands among the job's tries: the last one marks the row undeliverable when it fails. */
export type Attempt = { finalAttempt?: boolean; /** the time of delivery (a replayed history passes its own) */ now?: Date };

/**
 * Delivers one outbox row (the mail.send job's work). A permanent refusal marks the row 'undeliverable'
 * at once and returns (a retry would be refused again). Any other failure is recorded on the row and
 * thrown as DeliveryError so pg-boss retries it; on the job's final attempt the row is marked
 * 'undeliverable' before throwing. An undeliverable row is listed for an administrator (/admin/mail) and
 * the sender of a recommendation is told in the app: no e-mail is lost without someone seeing it.
 */
export async function deliver(outboxId: string, transport: Transport = getTransport(), attempt: Attempt = {}): Promise<DeliveryResult> {
	const outcome = await getDb().transaction(async (tx) => {
		const [row] = await tx.select().from(outboundEmails).where(eq(outboundEmails.id, outboxId)).for('update');
		if (!row) return { kind: 'missing' as const };
		if (row.status === 'sent') return { kind: 'already_sent' as const };
		if (row.status === 'undeliverable') return { kind: 'undeliverable' as const, message: row.lastError ?? 'undeliverable', thrown: false };
		const attempts = row.attempts + 1;
		const messageId = messageIdFor(row.id);
		let info: { messageId: string };
		try {
			info = await transport.sendMail({ from: config.mailFrom, to: row.toAddress, subject: row.subject, html: row.html, text: row.text, messageId });
		} catch (error) {
			const message = (error instanceof Error ? error.message : String(error)).slice(0, 1000);
			const permanent = isPermanentRefusal(error);
			if (permanent || attempt.finalAttempt) {
				await tx
					.update(outboundEmails)
					.set({ status: 'undeliverable', attempts, lastError: message, updatedAt: new Date() })
					.where(eq(outboundEmails.id, row.id));
				await tellSender(tx, row, message);
				return { kind: 'undeliverable' as const, message, thrown: !permanent };
			}
			await tx.update(outboundEmails).set({ status: 'failed', attempts, lastError: message, updatedAt: new Date() }).where(eq(outboundEmails.id, row.id));
			return { kind: 'failed' as const, message };
		}
		await tx
			.update(outboundEmails)
			.set({
				status: 'sent',
				attempts,
				lastError: null,
				smtpMessageId: info.messageId ?? messageId,
				sentAt: attempt.now ?? new Date(),
				updatedAt: attempt.now ?? new Date(),
				html: redactSecrets(row.html, row.relatedType),
				text: redactSecrets(row.text, row.relatedType)
			})
			.where(eq(outboundEmails.id, row.id));
		return { kind: 'sent' as const };
	});
	if (outcome.kind === 'failed') {
		logger.warn('e-mail not delivered; will retry', { outboxId, error: outcome.message });
		throw new DeliveryError(`E-mail ${outboxId} not delivered: ${outcome.message}`);
	}
	if (outcome.kind === 'undeliverable') {
		logger.warn('e-mail undeliverable; listed for an administrator', { outboxId, error: outcome.message });
		// retries spent: the job fails too (and goes to the dead-letter queue), the row says why
		if (outcome.thrown) throw new DeliveryError(`E-mail ${outboxId} undeliverable after its last attempt: ${outcome.message}`);
		return 'undeliverable';
	}
	if (outcome.kind === 'missing') logger.warn('outbox row not found', { outboxId });
	return outcome.kind;
}

/** The pharmacist who sent a recommendation hears in the app when its e-mail (or a reminder) cannot be delivered. */
async function tellSender(tx: DbOrTx, row: typeof outboundEmails.$inferSelect, error: string) {
	if ((row.relatedType !== 'recommendation' && row.relatedType !== 'reminder') || !row.relatedId) return;
	const [rec] = await tx
		.select({ pharmacistId: recommendations.pharmacistId, flagId: recommendations.flagId, agentName: sql<string>`${recommendations.current}->>'agentName'` })
		.from(recommendations)
		.where(sql`${recommendations.id}::text = ${row.relatedId}`);
	if (!rec) return;
	const what = row.relatedType === 'reminder' ? 'A reminder about your recommendation' : 'Your recommendation';
	await notify(
		tx,
		rec.pharmacistId,
		`${what} for ${rec.agentName} could not be delivered to ${row.toAddress} (${error.slice(0, 160)}). An administrator can resend it or record an answer taken by telephone.`,
		`/flags/${rec.flagId}`
	);
}
