import { index, integer, pgEnum, pgTable, text, uuid } from 'drizzle-orm/pg-core';
import { at, createdAt, id, updatedAt } from './columns';
import { users } from './auth';

/** failed: an attempt failed and pg-boss will retry; undeliverable: failed for good (refused, or retries spent) */
export const emailStatusEnum = pgEnum('email_status', ['queued', 'sent', 'failed', 'undeliverable']);

/** Outbox: one row per e-mail; the mail.send job delivers it once and records the result. */
export const outboundEmails = pgTable(
	'outbound_emails',
	{
		id: id(),
		toAddress: text().notNull(),
		subject: text().notNull(),
		html: text().notNull(),
		text: text().notNull(),
		status: emailStatusEnum().notNull().default('queued'),
		attempts: integer().notNull().default(0),
		lastError: text(),
		smtpMessageId: text(),
		relatedType: text(), // 'recommendation' | 'reminder' | 'digest'
		relatedId: text(),
		createdAt: createdAt(),
		updatedAt: updatedAt(),
		sentAt: at(),
		/** when the retention job blanked the subject detail and the bodies (the row stays for the record) */
		bodyRemovedAt: at(),
		/** what an administrator did about an undeliverable e-mail: 'resent' or 'answered_by_phone' */
		resolution: text(),
		resolvedAt: at(),
		resolvedBy: uuid().references(() => users.id)
	},
	(t) => [index('outbound_emails_status_idx').on(t.status, t.createdAt)]
);
