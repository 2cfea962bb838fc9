// The answer link in two steps: without confirmation it shows the proposal and no patient; a 6-digit code
// e-mailed to the recommendation's address (10 minutes, 5 tries, single use) or the physician's own
// sign-in shows the patient and lets the holder answer. Links stop working when the recommendation is
// withdrawn or the physician's account is deactivated.
import { and, desc, eq } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { users as userAccounts } from '../../../../src/lib/server/auth';
import { getDb } from '../../../../src/lib/server/db';
import { answerLinkCodes, auditLog, outboundEmails, recommendations } from '../../../../src/lib/server/db/schema';
import { messageIdFor } from '../../../../src/lib/server/mail';
import { QUEUES } from '../../../../src/lib/server/queue';
import * as recs from '../../../../src/lib/server/recommendations';
import { createFlag, createUser, type FlagFixture, who } from '../../../fixtures/recommendations';
import { mailWorkers, tokenIn, waitFor } from './smtp';

const smtp = mailWorkers([QUEUES.mailSend]);
const { linkAccess } = recs;
let pharmacist: Awaited<ReturnType<typeof createUser>>;
let physician: Awaited<ReturnType<typeof createUser>>;
let otherPhysician: Awaited<ReturnType<typeof createUser>>;
let admin: Awaited<ReturnType<typeof createUser>>;
const MINUTE_MS = 60_000;

beforeAll(async () => {
	const db = getDb();
	pharmacist = await createUser(db, 'pharmacist', 'Imke Harrowgate');
	physician = await createUser(db, 'physician', 'Dr Oriel Penhallow');
	otherPhysician = await createUser(db, 'physician', 'Dr Tamsin Vell');
	admin = await createUser(db, 'admin', 'Cato Ambrose');
});

async function mailOf(outboxId: string) {
	const [mail] = await waitFor(async () => {
		const got = smtp.byMessageId(messageIdFor(outboxId));
		return got.length ? got : null;
	}, 'the e-mail');
	return mail;
}

const MESSAGE = 'Please see creatinine trend; happy to discuss on bleep 4412.';

async function sendOne(f: FlagFixture, to = physician) {
	const ctx = (await recs.composeContext(f.flagId))!;
	const result = await recs.send(
		f.flagId,
		{
			doseMg: ctx.proposed!.doseMg,
			intervalH: ctx.proposed!.intervalH,
			infusionH: ctx.proposed!.infusionH,
			loadingDoseMg: ctx.proposed!.loadingDoseMg,
			recipient: `physician:${to.id}`,
			message: MESSAGE,
			version: ctx.flag.version
		},
		who(pharmacist)
	);
	if (!result.ok) throw new Error(result.error);
	const [outbox] = await getDb()
		.select()
		.from(outboundEmails)
		.where(and(eq(outboundEmails.relatedId, result.recommendationId), eq(outboundEmails.relatedType, 'recommendation')));
	const mail = await mailOf(outbox.id);
	return { id: result.recommendationId, token: tokenIn(mail.text) };
}

/** Asks for a code and reads it from the e-mail the fake relay received. */
async function codeFor(token: string, recommendationId: string, now = new Date()) {
	const asked = await linkAccess.requestCode(token, now);
	if (!asked.ok) throw new Error(`no code: ${asked.reason}`);
	const [row] = await getDb()
		.select()
		.from(outboundEmails)
		.where(and(eq(outboundEmails.relatedId, recommendationId), eq(outboundEmails.relatedType, 'answer_code')))
		.orderBy(desc(outboundEmails.createdAt))
		.limit(1);
	const mail = await mailOf(row.id);
	return { code: /Confirmation code: (\d{6})/.exec(mail.text)![1], mail, sentTo: asked.sentTo };
}

const wrongCode = (code: string) => String((Number(code) + 1) % 1_000_000).padStart(6, '0');

describe('before confirmation', () => {
	it('shows the proposal, numbers and caution, and nothing that names the patient or the pharmacist’s words', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		const found = await recs.findByToken(sent.token);
		expect(found).toMatchObject({ state: 'open', confirmed: false });
		if (found.state !== 'open' || found.confirmed) throw new Error('expected the preview');
		expect(found.preview.agentName).toBe('Meropenem');
		expect(found.preview.keyNumberRows.map((r) => r.label).join(' ')).toContain('Creatinine clearance');
		expect(found.preview.proposed).toMatchObject({ doseMg: 500, intervalH: 12 });
		const shown = JSON.stringify(found.preview);
		for (const identifier of [f.mrn, f.familyName, f.givenName, f.ward, `${f.givenName[0]}.${f.familyName[0]}.`, MESSAGE, 'bleep'])
			expect(shown).not.toContain(identifier);
	});

	it('cannot answer without confirming', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		expect(await recs.answer({ via: 'link', token: sent.token, access: recs.NO_ACCESS, requestId: null }, { outcome: 'accepted' })).toEqual({
			ok: false,
			reason: 'unconfirmed'
		});
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, sent.id));
		expect(rec.status).toBe('sent');
	});
});

describe('confirming with the e-mailed code', () => {
	it('sends the code to the recommendation’s address, stores only its hash, and then shows the patient', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		const { code, mail, sentTo } = await codeFor(sent.token, sent.id);
		expect(mail.envelopeTo).toEqual([physician.email]);
		expect(sentTo).toBe(`${physician.email[0]}•••@larkspur.test`);
		expect(mail.text).not.toContain(f.mrn);
		expect(mail.text).not.toContain('Meropenem');
		const [row] = await getDb().select().from(answerLinkCodes).where(eq(answerLinkCodes.recommendationId, sent.id));
		expect(row.codeHash).toMatch(/^[0-9a-f]{64}$/);
		expect(row.codeHash).not.toContain(code);

		const checked = await linkAccess.confirmCode(sent.token, code);
		if (!checked.ok) throw new Error(checked.reason);
		expect(checked.until.getTime() - Date.now()).toBeGreaterThan(25 * MINUTE_MS);
		const access = { confirmation: checked.confirmation, user: null };
		const found = await recs.findByToken(sent.token, access);
		expect(found).toMatchObject({ state: 'open', confirmed: 'code' });
		if (found.state !== 'open' || !found.confirmed) throw new Error('expected the full recommendation');
		expect(found.recommendation.patient).toContain(`MRN ${f.mrn}`);
		expect(found.recommendation.message).toBe(MESSAGE);
		// the stored copy of the delivered code e-mail keeps no code
		const [stored] = await getDb()
			.select()
			.from(outboundEmails)
			.where(and(eq(outboundEmails.relatedId, sent.id), eq(outboundEmails.relatedType, 'answer_code')));
		await waitFor(async () => (await getDb().select().from(outboundEmails).where(eq(outboundEmails.id, stored.id)))[0].status === 'sent', 'delivery');
		const [delivered] = await getDb().select().from(outboundEmails).where(eq(outboundEmails.id, stored.id));
		expect(delivered.text).not.toContain(code);

		// the confirmation answers
		expect(await recs.answer({ via: 'link', token: sent.token, access, requestId: null }, { outcome: 'accepted' })).toMatchObject({ ok: true });
	});

	it('is bound to its recommendation: the confirmation opens no other link', async () => {
		const one = await sendOne(await createFlag(getDb(), { prescriberId: physician.id }));
		const other = await sendOne(await createFlag(getDb(), { prescriberId: physician.id }));
		const { code } = await codeFor(one.token, one.id);
		const checked = await linkAccess.confirmCode(one.token, code);
		if (!checked.ok) throw new Error(checked.reason);
		expect(await recs.findByToken(other.token, { confirmation: checked.confirmation, user: null })).toMatchObject({ confirmed: false });
		// and the code of one does not confirm the other
		const { code: otherCode } = await codeFor(other.token, other.id);
		expect(await linkAccess.confirmCode(one.token, otherCode)).toMatchObject({ ok: false });
	});

	it('works once', async () => {
		const sent = await sendOne(await createFlag(getDb(), { prescriberId: physician.id }));
		const { code } = await codeFor(sent.token, sent.id);
		expect(await linkAccess.confirmCode(sent.token, code)).toMatchObject({ ok: true });
		expect(await linkAccess.confirmCode(sent.token, code)).toMatchObject({ ok: false, reason: 'no_code' });
	});

	it('expires after 10 minutes, and the confirmation after 30', async () => {
		const sent = await sendOne(await createFlag(getDb(), { prescriberId: physician.id }));
		const start = new Date();
		const { code } = await codeFor(sent.token, sent.id, start);
		expect(await linkAccess.confirmCode(sent.token, code, new Date(start.getTime() + 10 * MINUTE_MS + 1000))).toMatchObject({
			ok: false,
			reason: 'code_expired'
		});
		const fresh = await codeFor(sent.token, sent.id, new Date(start.getTime() + 11 * MINUTE_MS));
		const at = new Date(start.getTime() + 12 * MINUTE_MS);
		const checked = await linkAccess.confirmCode(sent.token, fresh.code, at);
		if (!checked.ok) throw new Error(checked.reason);
		const access = { confirmation: checked.confirmation, user: null };
		expect(await recs.findByToken(sent.token, access, new Date(at.getTime() + 29 * MINUTE_MS))).toMatchObject({ confirmed: 'code' });
		expect(await recs.findByToken(sent.token, access, new Date(at.getTime() + 31 * MINUTE_MS))).toMatchObject({ confirmed: false });
	});

	it('is spent after five wrong tries; a new code replaces it, at most once a minute', async () => {
		const sent = await sendOne(await createFlag(getDb(), { prescriberId: physician.id }));
		const start = new Date();
		const { code } = await codeFor(sent.token, sent.id, start);
		const left: (number | undefined)[] = [];
		for (let i = 0; i < 5; i++) {
			const tried = await linkAccess.confirmCode(sent.token, wrongCode(code), start);
			expect(tried).toMatchObject({ ok: false, reason: 'wrong' });
			if (!tried.ok) left.push(tried.attemptsLeft);
		}
		expect(left).toEqual([4, 3, 2, 1, 0]);
		// the right code no longer works
		expect(await linkAccess.confirmCode(sent.token, code, start)).toMatchObject({ ok: false, reason: 'no_code' });
		expect(await linkAccess.requestCode(sent.token, new Date(start.getTime() + 30_000))).toEqual({ ok: false, reason: 'too_soon' });
		const next = await codeFor(sent.token, sent.id, new Date(start.getTime() + 61_000));
		expect(await linkAccess.confirmCode(sent.token, next.code, new Date(start.getTime() + 62_000))).toMatchObject({ ok: true });
	});

	it('lets the recommendation’s own physician, signed in, skip the code; nobody else', async () => {
		const sent = await sendOne(await createFlag(getDb(), { prescriberId: physician.id }));
		expect(await recs.findByToken(sent.token, { confirmation: null, user: physician })).toMatchObject({ confirmed: 'account' });
		expect(await recs.findByToken(sent.token, { confirmation: null, user: otherPhysician })).toMatchObject({ confirmed: false });
		expect(await recs.findByToken(sent.token, { confirmation: null, user: admin })).toMatchObject({ confirmed: false });
		expect(await recs.findByToken(sent.token, { confirmation: null, user: pharmacist })).toMatchObject({ confirmed: false });
	});
});

describe('revoked links', () => {
	it('a withdrawn recommendation’s link sends no code and shows nothing, confirmed or not', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		const { code } = await codeFor(sent.token, sent.id);
		const checked = await linkAccess.confirmCode(sent.token, code);
		if (!checked.ok) throw new Error(checked.reason);
		await getDb().update(recommendations).set({ status: 'withdrawn', withdrawnAt: new Date() }).where(eq(recommendations.id, sent.id));
		expect(await recs.findByToken(sent.token, { confirmation: checked.confirmation, user: physician })).toEqual({ state: 'withdrawn' });
		expect(await linkAccess.requestCode(sent.token, new Date(Date.now() + 120_000))).toEqual({ ok: false, reason: 'withdrawn' });
	});

	it('deactivating the physician revokes their open links for good, and says nothing about the patient', async () => {
		const doctor = await createUser(getDb(), 'physician', 'Dr Leaving Soon');
		const f = await createFlag(getDb(), { prescriberId: doctor.id });
		const sent = await sendOne(f, doctor);
		const { code } = await codeFor(sent.token, sent.id);
		const checked = await linkAccess.confirmCode(sent.token, code);
		if (!checked.ok) throw new Error(checked.reason);
		const access = { confirmation: checked.confirmation, user: null };

		await userAccounts.update(doctor.id, { active: false }, { actorId: admin.id, actorLabel: admin.email, requestId: null });
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, sent.id));
		expect(rec.tokenRevokedAt).not.toBeNull();
		expect(await recs.findByToken(sent.token, access)).toEqual({ state: 'revoked' });
		expect(await recs.answer({ via: 'link', token: sent.token, access, requestId: null }, { outcome: 'accepted' })).toEqual({ ok: false, reason: 'revoked' });
		expect(await linkAccess.requestCode(sent.token, new Date(Date.now() + 120_000))).toEqual({ ok: false, reason: 'revoked' });
		const [audit] = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.objectId, doctor.id), eq(auditLog.action, 'user.deactivated')));
		expect(audit.after).toMatchObject({ active: false, revokedAnswerLinks: 1 });

		// reactivating the account does not bring the link back
		await userAccounts.update(doctor.id, { active: true }, { actorId: admin.id, actorLabel: admin.email, requestId: null });
		expect(await recs.findByToken(sent.token, access)).toEqual({ state: 'revoked' });
	});
});
