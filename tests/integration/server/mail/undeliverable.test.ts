// No silent mail loss: the fake relay refuses a recipient permanently (550) → the e-mail is marked
// undeliverable after one attempt, the sender is told, the administrator's list shows it with its
// recommendation and patient, and it is settled by a resend (a new, delivered e-mail) or by the
// physician's answer taken by telephone (which closes the flag). A temporary refusal (451) is retried
// and marked undeliverable only on the job's last attempt.
import { and, eq, sql } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { mailSend } from '../../../../jobs/mail-send';
import { getDb } from '../../../../src/lib/server/db';
import { auditLog, flags, notifications, outboundEmails, recommendations, users } from '../../../../src/lib/server/db/schema';
import { digestEmail, snapshot } from '../../../../src/lib/server/notifications';
import { deliver, DeliveryError, messageIdFor, undeliverable } from '../../../../src/lib/server/mail';
import { QUEUES } from '../../../../src/lib/server/queue';
import * as recs from '../../../../src/lib/server/recommendations';
import { createFlag, createUser, type FlagFixture, who } from '../../../fixtures/recommendations';
import { mailWorkers, tokenIn, waitFor } from '../recommendations/smtp';

const smtp = mailWorkers([QUEUES.mailSend], { schedules: false });
let pharmacist: Awaited<ReturnType<typeof createUser>>;
let admin: Awaited<ReturnType<typeof createUser>>;

beforeAll(async () => {
	const db = getDb();
	pharmacist = await createUser(db, 'pharmacist', 'Elowen Carne');
	admin = await createUser(db, 'admin', 'Piran Hocking');
});

/** A physician whose mailbox the relay does not know. */
async function unreachablePhysician() {
	const db = getDb();
	const doctor = await createUser(db, 'physician', 'Dr Kerensa Pascoe');
	const address = `no-such-mailbox-${doctor.email}`.replace(/@.*$/, '@larkspur.test');
	await db.update(users).set({ email: address }).where(eq(users.id, doctor.id));
	return { ...doctor, email: address };
}

async function outboxRow(id: string) {
	const [row] = await getDb().select().from(outboundEmails).where(eq(outboundEmails.id, id));
	return row;
}

/** Sends the pre-filled recommendation and waits until its e-mail has failed for good. */
async function undeliverableRecommendation(): Promise<{ fixture: FlagFixture; id: string; outboxId: string; to: string }> {
	const doctor = await unreachablePhysician();
	const fixture = await createFlag(getDb(), { prescriberId: doctor.id });
	const ctx = await recs.composeContext(fixture.flagId);
	if (!ctx?.proposed) throw new Error('the fixture should propose a regimen');
	const result = await recs.send(
		fixture.flagId,
		{
			doseMg: ctx.proposed.doseMg,
			intervalH: ctx.proposed.intervalH,
			infusionH: ctx.proposed.infusionH,
			loadingDoseMg: ctx.proposed.loadingDoseMg,
			recipient: `physician:${doctor.id}`,
			message: ctx.draft,
			version: ctx.flag.version
		},
		who(pharmacist)
	);
	if (!result.ok) throw new Error(result.error);
	const [queued] = await getDb()
		.select()
		.from(outboundEmails)
		.where(and(eq(outboundEmails.relatedType, 'recommendation'), eq(outboundEmails.relatedId, result.recommendationId)));
	await waitFor(async () => (await outboxRow(queued.id)).status === 'undeliverable', 'the e-mail to be marked undeliverable');
	return { fixture, id: result.recommendationId, outboxId: queued.id, to: doctor.email };
}

describe('a permanent refusal', () => {
	it('marks the e-mail undeliverable after one attempt, tells the sender, and lists it for an administrator', async () => {
		const { fixture, id, outboxId, to } = await undeliverableRecommendation();
		const row = await outboxRow(outboxId);
		expect(row).toMatchObject({ status: 'undeliverable', attempts: 1, toAddress: to, resolution: null });
		expect(row.lastError).toMatch(/550/);
		// not retried: the job completed, no second attempt is made
		await new Promise((r) => setTimeout(r, 1500));
		expect((await outboxRow(outboxId)).attempts).toBe(1);
		expect(smtp.byMessageId(messageIdFor(outboxId))).toHaveLength(0);

		const told = await getDb()
			.select()
			.from(notifications)
			.where(and(eq(notifications.userId, pharmacist.id), sql`${notifications.text} like ${'%could not be delivered to ' + to + '%'}`));
		expect(told).toHaveLength(1);
		expect(told[0].link).toBe(`/flags/${fixture.flagId}`);

		const open = await undeliverable.list('open');
		const listed = open.find((r) => r.id === outboxId);
		expect(listed).toMatchObject({
			to,
			attempts: 1,
			kind: 'recommendation',
			recommendation: { id, status: 'sent', flagId: fixture.flagId },
			patient: { mrn: fixture.mrn }
		});
		expect(listed!.lastError).toMatch(/550/);
		expect(await undeliverable.countOpen()).toBeGreaterThanOrEqual(1);

		const snap = await snapshot(getDb(), new Date());
		expect(snap.undeliverable).toBe(await undeliverable.countOpen());
		expect(digestEmail(snap, 'Elowen Carne', 'initials_mrn_ward').text).toMatch(/\d+ e-mails? from Ebbline could not be delivered/);
	});

	it('resend queues a new e-mail that is delivered (to a corrected address) and settles the old one', async () => {
		const { id, outboxId } = await undeliverableRecommendation();
		expect(await undeliverable.resend(outboxId, 'not an address', who(admin))).toMatchObject({ ok: false, field: 'to' });
		expect((await outboxRow(outboxId)).resolution).toBeNull();
		const corrected = `kerensa.pascoe-${id.slice(0, 6)}@larkspur.test`;
		const result = await undeliverable.resend(outboxId, corrected, who(admin));
		if (!result.ok) throw new Error(result.error);
		expect(result.outboxId).not.toBe(outboxId);
		const [mail] = await waitFor(async () => {
			const got = smtp.byMessageId(messageIdFor(result.outboxId));
			return got.length ? got : null;
		}, 'the resent e-mail');
		expect(mail.envelopeTo).toEqual([corrected]);
		// the same content, with a link that still answers the recommendation
		const token = tokenIn(mail.text);
		expect((await recs.findByToken(token)).state).toBe('open');
		expect(await outboxRow(result.outboxId)).toMatchObject({ status: 'sent', toAddress: corrected, relatedType: 'recommendation', relatedId: id });
		expect(await outboxRow(outboxId)).toMatchObject({ status: 'undeliverable', resolution: 'resent', resolvedBy: admin.id });
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, id));
		expect(rec.recipientEmail).toBe(corrected);
		expect((await undeliverable.list('open')).map((r) => r.id)).not.toContain(outboxId);
		expect((await undeliverable.list('settled')).find((r) => r.id === outboxId)).toMatchObject({ resolution: 'resent', resolvedBy: admin.displayName });
		const audit = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.objectId, outboxId), eq(auditLog.action, 'mail.resent')));
		expect(audit).toHaveLength(1);
		// settled once
		expect(await undeliverable.resend(outboxId, corrected, who(admin))).toMatchObject({ ok: false, status: 409 });
	});

	it('answered by telephone records the outcome, closes the flag with it and settles the e-mail', async () => {
		const { fixture, id, outboxId } = await undeliverableRecommendation();
		const result = await undeliverable.answeredByPhone(
			outboxId,
			{ outcome: 'declined', note: 'Patient to be reviewed by nephrology first; keep the current dose.' },
			who(admin)
		);
		expect(result).toEqual({ ok: true, flagClosed: true });
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, id));
		expect(rec).toMatchObject({
			status: 'declined',
			respondedVia: 'phone',
			responseReason: 'Patient to be reviewed by nephrology first; keep the current dose.'
		});
		const [flag] = await getDb().select().from(flags).where(eq(flags.id, fixture.flagId));
		expect(flag).toMatchObject({ state: 'closed', outcome: 'declined' });
		expect(await outboxRow(outboxId)).toMatchObject({ resolution: 'answered_by_phone', resolvedBy: admin.id });
		const actions = (await getDb().select({ action: auditLog.action, actorId: auditLog.actorId }).from(auditLog).where(eq(auditLog.objectId, id))).map(
			(a) => a.action
		);
		expect(actions).toContain('recommendation.declined');
		expect((await undeliverable.list('open')).map((r) => r.id)).not.toContain(outboxId);
		// nothing left to answer, nothing to resend
		expect(await undeliverable.answeredByPhone(outboxId, { outcome: 'accepted', note: '' }, who(admin))).toMatchObject({ ok: false, status: 409 });
	});

	it('an e-mail that belongs to no recommendation can only be resent', async () => {
		const [row] = await getDb()
			.insert(outboundEmails)
			.values({
				toAddress: 'no-such-mailbox-digest@larkspur.test',
				subject: 'Ebbline morning digest',
				html: '<p>digest</p>',
				text: 'digest',
				relatedType: 'digest',
				relatedId: `2031-04-02:${pharmacist.id}`,
				status: 'undeliverable',
				attempts: 1,
				lastError: '550 no such mailbox'
			})
			.returning();
		expect(await undeliverable.answeredByPhone(row.id, { outcome: 'accepted', note: '' }, who(admin))).toMatchObject({ ok: false, status: 409 });
		expect((await undeliverable.list('open')).find((r) => r.id === row.id)).toMatchObject({ recommendation: null, patient: null });
	});
});

describe('a temporary refusal', () => {
	it('is retried, and marked undeliverable by the attempt that reaches the retry limit', async () => {
		const [row] = await getDb()
			.insert(outboundEmails)
			.values({
				toAddress: 'mailbox-busy-ward3@larkspur.test',
				subject: 'A reminder',
				html: '<p>Reminder</p>',
				text: 'Reminder',
				relatedType: 'digest',
				relatedId: `2031-04-03:${pharmacist.id}`
			})
			.returning();
		await expect(deliver(row.id, undefined, { finalAttempt: false })).rejects.toBeInstanceOf(DeliveryError);
		expect(await outboxRow(row.id)).toMatchObject({ status: 'failed', attempts: 1 });
		expect((await outboxRow(row.id)).lastError).toMatch(/451/);
		await expect(deliver(row.id, undefined, { finalAttempt: true })).rejects.toBeInstanceOf(DeliveryError);
		expect(await outboxRow(row.id)).toMatchObject({ status: 'undeliverable', attempts: 2 });
		// once undeliverable, a stray retry sends nothing
		expect(await deliver(row.id)).toBe('undeliverable');
		expect((await outboxRow(row.id)).attempts).toBe(2);
	});

	it('the job tells deliver() which attempt is the last one', async () => {
		const [row] = await getDb()
			.insert(outboundEmails)
			.values({
				toAddress: 'mailbox-busy-icu@larkspur.test',
				subject: 'A reminder',
				html: '<p>Reminder</p>',
				text: 'Reminder',
				relatedType: 'digest',
				relatedId: `2031-04-04:${pharmacist.id}`
			})
			.returning();
		const job = (retryCount: number) => ({
			id: 'j',
			name: QUEUES.mailSend,
			data: { outboxId: row.id },
			expireInSeconds: 60,
			retryCount,
			retryLimit: mailSend.queue.retryLimit
		});
		const boss = undefined as never;
		await expect(mailSend.handler([job(0)], boss)).rejects.toBeInstanceOf(DeliveryError);
		expect((await outboxRow(row.id)).status).toBe('failed');
		await expect(mailSend.handler([job(mailSend.queue.retryLimit as number)], boss)).rejects.toBeInstanceOf(DeliveryError);
		expect((await outboxRow(row.id)).status).toBe('undeliverable');
	});
});
