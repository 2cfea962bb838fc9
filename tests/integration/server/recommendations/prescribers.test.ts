// Recommendations to the order's own prescriber, found in the directory the feed fills: no Ebbline
// account needed. The e-mail goes to the prescriber's address, its link answers and closes the flag,
// choosing a covering physician instead is recorded, a prescriber with no e-mail cannot be chosen, and
// a prescriber who answered may set up an account (single-use link by e-mail) and then sees the
// history under My recommendations.
import { and, eq, sql } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { completeAccountSetup, offerAccountSetup, readAccountSetup } from '../../../../src/lib/server/auth';
import { getDb } from '../../../../src/lib/server/db';
import { auditLog, flags, orders, outboundEmails, prescribers, recommendations, users } from '../../../../src/lib/server/db/schema';
import { messageIdFor } from '../../../../src/lib/server/mail';
import { QUEUES } from '../../../../src/lib/server/queue';
import * as recs from '../../../../src/lib/server/recommendations';
import { createFlag, createUser, type FlagFixture, who } from '../../../fixtures/recommendations';
import { mailWorkers, tokenIn, waitFor } from './smtp';

const smtp = mailWorkers([QUEUES.mailSend]);
let pharmacist: Awaited<ReturnType<typeof createUser>>;
let covering: Awaited<ReturnType<typeof createUser>>;

beforeAll(async () => {
	pharmacist = await createUser(getDb(), 'pharmacist', 'Ottoline Brisk');
	covering = await createUser(getDb(), 'physician', 'Dr Covering Hale');
});

/** A flag whose order names a prescriber in the directory (no account). */
async function flagWithPrescriber(email: string | null, emailProblem: string | null = null): Promise<FlagFixture & { prescriberId: string }> {
	const db = getDb();
	const tag = Math.random().toString(36).slice(2, 8);
	const [prescriber] = await db
		.insert(prescribers)
		.values({ name: `Dr Wystan Pell ${tag}`, email: email?.replace('@', `+${tag}@`) ?? null, emailProblem })
		.returning({ id: prescribers.id });
	const f = await createFlag(db, { prescriberId: null });
	await db.update(orders).set({ practitionerId: prescriber.id }).where(eq(orders.id, f.orderId));
	return { ...f, prescriberId: prescriber.id };
}

async function mailTo(outboxId: string) {
	const [mail] = await waitFor(async () => {
		const got = smtp.byMessageId(messageIdFor(outboxId));
		return got.length ? got : null;
	}, 'the e-mail');
	return mail;
}

async function outboxOf(relatedId: string) {
	const [row] = await getDb().select().from(outboundEmails).where(eq(outboundEmails.relatedId, relatedId));
	return row;
}

describe('the order’s prescriber without an account', () => {
	it('is chosen by default, receives the e-mail at the directory’s address, and answers from the link', async () => {
		const f = await flagWithPrescriber('wystan.pell@larkspur.test');
		const [p] = await getDb().select().from(prescribers).where(eq(prescribers.id, f.prescriberId));
		const ctx = (await recs.composeContext(f.flagId))!;
		expect(ctx.defaultRecipient).toBe(`prescriber:${f.prescriberId}`);
		expect(ctx.recipients[0]).toMatchObject({
			value: `prescriber:${f.prescriberId}`,
			isPrescriber: true,
			hasAccount: false,
			email: p.email,
			unavailable: null
		});
		expect(ctx.recipients.some((r) => r.value === `physician:${covering.id}` && !r.isPrescriber)).toBe(true);

		const sent = await recs.send(
			f.flagId,
			{ doseMg: 500, intervalH: 12, infusionH: 0.5, loadingDoseMg: null, recipient: ctx.defaultRecipient!, message: ctx.draft, version: ctx.flag.version },
			who(pharmacist)
		);
		expect(sent.ok).toBe(true);
		const id = (sent as { recommendationId: string }).recommendationId;
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, id));
		expect(rec).toMatchObject({
			physicianId: null,
			recipientPrescriberId: f.prescriberId,
			recipientEmail: p.email,
			recipientName: p.name,
			recipientChoice: 'prescriber'
		});
		const mail = await mailTo((await outboxOf(id)).id);
		expect(mail.envelopeTo).toEqual([p.email]);

		const token = tokenIn(mail.text);
		expect(await recs.findByToken(token)).toMatchObject({ state: 'open', confirmed: false });
		// no account needed to confirm: the code goes to the address the recommendation went to
		expect(await recs.linkAccess.requestCode(token)).toMatchObject({ ok: true, sentTo: 'w•••@larkspur.test' });
		const [codeRow] = await getDb()
			.select()
			.from(outboundEmails)
			.where(and(eq(outboundEmails.relatedId, id), eq(outboundEmails.relatedType, 'answer_code')));
		const codeMail = await mailTo(codeRow.id);
		expect(codeMail.envelopeTo).toEqual([p.email]);
		const checked = await recs.linkAccess.confirmCode(token, /Confirmation code: (\d{6})/.exec(codeMail.text)![1]);
		if (!checked.ok) throw new Error(`the code from the e-mail should confirm: ${checked.reason}`);
		const access = { confirmation: checked.confirmation, user: null };
		expect(await recs.findByToken(token, access)).toMatchObject({ state: 'open', confirmed: 'code' });
		const answered = await recs.answer({ via: 'link', token, access, requestId: null }, { outcome: 'accepted' });
		expect(answered).toMatchObject({ ok: true, status: 'accepted', flagClosed: true });
		const [flag] = await getDb().select().from(flags).where(eq(flags.id, f.flagId));
		expect(flag).toMatchObject({ state: 'closed', outcome: 'accepted' });
		const [audit] = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.objectId, id), eq(auditLog.action, 'recommendation.accepted')));
		expect(audit).toMatchObject({ actorId: null, actorLabel: `${p.email} (answer link)` });
		const [sentAudit] = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.objectId, id), eq(auditLog.action, 'recommendation.sent')));
		expect(sentAudit.after).toMatchObject({ to: p.email, prescriberId: f.prescriberId, choice: "the order's prescriber" });

		// set up an account afterwards: a single-use link to the same address; then the history shows
		const after = await recs.findByToken(token);
		expect(after).toMatchObject({ state: 'answered', canSetUpAccount: true });
		const offer = await offerAccountSetup(token, null);
		expect(offer).toEqual({ ok: true, email: p.email });
		const [setupRow] = await getDb()
			.select()
			.from(outboundEmails)
			.where(and(eq(outboundEmails.relatedType, 'account_setup'), eq(outboundEmails.toAddress, p.email!)));
		const setupMail = await mailTo(setupRow.id);
		const setupToken = /\/account\/setup\/([A-Za-z0-9_-]{43})\b/.exec(setupMail.text)![1];
		expect(await readAccountSetup(setupToken)).toMatchObject({ state: 'open', email: p.email!.toLowerCase(), name: p.name });
		const created = await completeAccountSetup(setupToken, { displayName: 'Dr Wystan Pell', password: 'a long enough password' }, null);
		expect(created.ok).toBe(true);
		const userId = (created as { userId: string }).userId;
		const [user] = await getDb().select().from(users).where(eq(users.id, userId));
		expect(user).toMatchObject({ role: 'physician', email: p.email!.toLowerCase(), active: true });
		expect((await getDb().select().from(prescribers).where(eq(prescribers.id, f.prescriberId)))[0].userId).toBe(userId);
		const history = await recs.listFor({ id: userId, role: 'physician', email: user.email });
		expect(history.map((r) => r.id)).toContain(id);
		// the link works once; the answer link no longer offers an account
		expect(await completeAccountSetup(setupToken, { displayName: 'Someone Else', password: 'another long password' }, null)).toEqual({
			ok: false,
			reason: 'used'
		});
		expect(await recs.findByToken(token)).toMatchObject({ canSetUpAccount: false });
		expect(await offerAccountSetup(token, null)).toEqual({ ok: false, reason: 'has_account' });
	});

	it('records a covering physician chosen instead, and the covering physician answers in the app', async () => {
		const f = await flagWithPrescriber('wystan.pell@larkspur.test');
		const ctx = (await recs.composeContext(f.flagId))!;
		const sent = await recs.send(
			f.flagId,
			{ doseMg: 500, intervalH: 12, infusionH: 0.5, loadingDoseMg: null, recipient: `physician:${covering.id}`, message: ctx.draft, version: ctx.flag.version },
			who(pharmacist)
		);
		const id = (sent as { recommendationId: string }).recommendationId;
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, id));
		expect(rec).toMatchObject({ physicianId: covering.id, recipientEmail: covering.email, recipientChoice: 'other', recipientPrescriberId: null });
		const [sentAudit] = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.objectId, id), eq(auditLog.action, 'recommendation.sent')));
		expect(sentAudit.after).toMatchObject({ choice: 'another physician', to: covering.email });
		expect(await recs.openCountFor(covering)).toBeGreaterThanOrEqual(1);
		const answered = await recs.answer(
			{ via: 'app', id, user: who(covering) },
			{ outcome: 'declined', reason: 'Covering: the team will review on the ward round.' }
		);
		expect(answered).toMatchObject({ ok: true, status: 'declined' });
	});

	it('cannot be chosen when the directory has no usable e-mail, and the page says why', async () => {
		const f = await flagWithPrescriber(null, "'pell at larkspur' is not an e-mail address");
		const ctx = (await recs.composeContext(f.flagId))!;
		expect(ctx.defaultRecipient).toBeNull();
		expect(ctx.recipients[0]).toMatchObject({
			isPrescriber: true,
			email: null,
			unavailable: "no e-mail on record ('pell at larkspur' is not an e-mail address)"
		});
		const refused = await recs.send(
			f.flagId,
			{
				doseMg: 500,
				intervalH: 12,
				infusionH: 0.5,
				loadingDoseMg: null,
				recipient: `prescriber:${f.prescriberId}`,
				message: ctx.draft,
				version: ctx.flag.version
			},
			who(pharmacist)
		);
		expect(refused).toMatchObject({ ok: false, status: 422, field: 'recipient' });
		expect((refused as { error: string }).error).toMatch(/no e-mail on record/);
		const written = await getDb()
			.select({ n: sql<number>`count(*)::int` })
			.from(recommendations)
			.where(eq(recommendations.flagId, f.flagId));
		expect(written[0].n).toBe(0);
	});
});
