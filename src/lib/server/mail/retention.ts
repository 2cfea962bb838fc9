// Retention of outbound e-mail: a delivered e-mail's text (which names a patient, a drug, a dose) is kept
// for a set number of days, then blanked by the mail.purge job. The row stays for the record: recipient,
// kind, times, attempts and status. E-mails not delivered keep their text (an administrator may resend).
import { and, eq, isNull, lt, sql } from 'drizzle-orm';
import { getDb } from '../db';
import { outboundEmails } from '../db/schema';

const DAY_MS = 86_400_000;

/** The subject once the text is gone: its kind only, never the drug or the patient. */
const KEPT_SUBJECT = sql`case ${outboundEmails.relatedType}
	when 'recommendation' then 'Dose recommendation'
	when 'reminder' then 'Reminder of a dose recommendation'
	when 'digest' then 'Morning digest'
	when 'account_setup' then 'Account set-up link'
	when 'answer_code' then 'Confirmation code'
	else 'E-mail' end`;

export function removedNote(days: number): string {
	return `removed after ${days} ${days === 1 ? 'day' : 'days'}`;
}

/** Blanks the subject detail and both bodies of e-mails delivered more than `retentionDays` ago; returns how many. */
export async function purgeBodies(retentionDays: number, now = new Date()): Promise<number> {
	const before = new Date(now.getTime() - retentionDays * DAY_MS);
	const note = `(text ${removedNote(retentionDays)})`;
	const rows = await getDb()
		.update(outboundEmails)
		.set({ subject: KEPT_SUBJECT, html: note, text: note, bodyRemovedAt: now, updatedAt: now })
		.where(and(eq(outboundEmails.status, 'sent'), isNull(outboundEmails.bodyRemovedAt), lt(outboundEmails.sentAt, before)))
		.returning({ id: outboundEmails.id });
	return rows.length;
}
