// The mail.purge job: delivered e-mails older than the retention setting lose their subject detail and
// text; the row (recipient, kind, times, status) stays. Recent and undelivered e-mails keep their text.
import { eq, inArray } from 'drizzle-orm';
import { describe, expect, it } from 'vitest';
import { mailPurge } from '../../../../jobs/mail-purge';
import { getDb } from '../../../../src/lib/server/db';
import { outboundEmails } from '../../../../src/lib/server/db/schema';
import * as settings from '../../../../src/lib/server/settings';

const DAY_MS = 86_400_000;
const ago = (days: number) => new Date(Date.now() - days * DAY_MS);

async function email(status: 'sent' | 'undeliverable' | 'queued', daysAgo: number, relatedType = 'recommendation') {
	const [row] = await getDb()
		.insert(outboundEmails)
		.values({
			toAddress: 'dr.penhallow@larkspur.test',
			subject: 'Dose recommendation for Meropenem: please answer',
			html: '<p>Patient O.P. · MRN 40012345 · 3 North</p>',
			text: 'Patient O.P. · MRN 40012345 · 3 North',
			status,
			relatedType,
			relatedId: crypto.randomUUID(),
			attempts: 1,
			createdAt: ago(daysAgo),
			updatedAt: ago(daysAgo),
			sentAt: status === 'sent' ? ago(daysAgo) : null
		})
		.returning();
	return row;
}

const run = () => mailPurge.handler([] as never, undefined as never) as Promise<{ retentionDays: number; removed: number }>;
const rowsOf = async (ids: string[]) => {
	const rows = await getDb().select().from(outboundEmails).where(inArray(outboundEmails.id, ids));
	return Object.fromEntries(rows.map((r) => [r.id, r]));
};

describe('mail.purge', () => {
	it('blanks delivered e-mails older than 30 days by default, keeping the row; recent and undelivered ones keep their text', async () => {
		const old = await email('sent', 31);
		const oldReminder = await email('sent', 45, 'reminder');
		const recent = await email('sent', 29);
		const failed = await email('undeliverable', 60);
		const waiting = await email('queued', 40);

		expect(await run()).toMatchObject({ retentionDays: 30, removed: 2 });
		const rows = await rowsOf([old.id, oldReminder.id, recent.id, failed.id, waiting.id]);
		for (const purged of [rows[old.id], rows[oldReminder.id]]) {
			expect(purged.text).not.toContain('40012345');
			expect(purged.html).not.toContain('40012345');
			expect(purged.subject).not.toContain('Meropenem');
			expect(purged.text).toBe('(text removed after 30 days)');
			expect(purged.bodyRemovedAt).not.toBeNull();
			// the record stays
			expect(purged).toMatchObject({ toAddress: 'dr.penhallow@larkspur.test', status: 'sent', attempts: 1 });
			expect(purged.sentAt).not.toBeNull();
		}
		expect(rows[old.id].subject).toBe('Dose recommendation');
		expect(rows[oldReminder.id].subject).toBe('Reminder of a dose recommendation');
		for (const kept of [rows[recent.id], rows[failed.id], rows[waiting.id]]) {
			expect(kept.text).toContain('MRN 40012345');
			expect(kept.subject).toContain('Meropenem');
			expect(kept.bodyRemovedAt).toBeNull();
		}
		// a second run finds nothing more
		expect(await run()).toMatchObject({ removed: 0 });
	});

	it('follows the administrator’s setting', async () => {
		const fiveDays = await email('sent', 5);
		const before = await settings.get();
		await settings.update({ ...before, emailRetentionDays: 3 }, { actorId: null, actorLabel: 'test', requestId: null });
		try {
			expect(await run()).toMatchObject({ retentionDays: 3 });
			const [row] = await getDb().select().from(outboundEmails).where(eq(outboundEmails.id, fiveDays.id));
			expect(row.text).toBe('(text removed after 3 days)');
		} finally {
			await settings.update(before, { actorId: null, actorLabel: 'test', requestId: null });
		}
	});
});
