// Recommendations end to end through the real queue and the project's fake SMTP server: compose from a
// flag, the e-mail and its link, single use, expiry, tampering, the flag's outcome, the audit log, and
// exactly-once delivery while the relay is down and after it returns.
import { and, desc, eq, sql } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { digestMorning } from '../../../../jobs/digest-morning';
import { PROPOSAL_CAUTION } from '../../../../src/lib/clinical/trace';
import { getDb } from '../../../../src/lib/server/db';
import { assessments, auditLog, flagEvents, flags, notifications, outboundEmails, recommendations } from '../../../../src/lib/server/db/schema';
import { deliver, messageIdFor } from '../../../../src/lib/server/mail';
import { QUEUES } from '../../../../src/lib/server/queue';
import * as recs from '../../../../src/lib/server/recommendations';
import * as settings from '../../../../src/lib/server/settings';
import { hashToken } from '../../../../src/lib/server/auth';
import { confirmedAccess, createFlag, createUser, type FlagFixture, who } from '../../../fixtures/recommendations';
import { mailWorkers, ORIGIN, tokenIn, waitFor, type Received } from './smtp';

const smtp = mailWorkers([QUEUES.mailSend, QUEUES.digestMorning]);
let pharmacist: Awaited<ReturnType<typeof createUser>>;
let physician: Awaited<ReturnType<typeof createUser>>;
let otherPhysician: Awaited<ReturnType<typeof createUser>>;
let admin: Awaited<ReturnType<typeof createUser>>;

beforeAll(async () => {
	const db = getDb();
	pharmacist = await createUser(db, 'pharmacist', 'Imke Harrowgate');
	physician = await createUser(db, 'physician', 'Dr Oriel Penhallow');
	otherPhysician = await createUser(db, 'physician', 'Dr Tamsin Vell');
	admin = await createUser(db, 'admin', 'Cato Ambrose');
});

async function outboxFor(recommendationId: string, type = 'recommendation') {
	const [row] = await getDb()
		.select()
		.from(outboundEmails)
		.where(and(eq(outboundEmails.relatedId, recommendationId), eq(outboundEmails.relatedType, type)));
	return row;
}

/** Sends the pre-filled recommendation for a new flag and waits for it to arrive. */
async function sendOne(fixture: FlagFixture, overrides: Partial<Parameters<typeof recs.send>[1]> = {}) {
	const ctx = await recs.composeContext(fixture.flagId);
	if (!ctx?.proposed) throw new Error('the fixture should have a proposed regimen');
	const result = await recs.send(
		fixture.flagId,
		{
			doseMg: ctx.proposed.doseMg,
			intervalH: ctx.proposed.intervalH,
			infusionH: ctx.proposed.infusionH,
			loadingDoseMg: ctx.proposed.loadingDoseMg,
			...(overrides.physicianId || overrides.recipient ? {} : { recipient: ctx.defaultRecipient ?? `physician:${physician.id}` }),
			message: ctx.draft,
			version: ctx.flag.version,
			...overrides
		},
		who(pharmacist)
	);
	if (!result.ok) throw new Error(result.error);
	const outbox = await outboxFor(result.recommendationId);
	const [mail] = await waitFor(async () => {
		const got = smtp.byMessageId(messageIdFor(outbox.id));
		return got.length ? got : null;
	}, 'the recommendation e-mail');
	return { id: result.recommendationId, outboxId: outbox.id, mail, token: tokenIn(mail.text) };
}

async function flagRow(id: string) {
	const [row] = await getDb().select().from(flags).where(eq(flags.id, id));
	return row;
}

async function auditActions(objectId: string) {
	const rows = await getDb()
		.select({ action: auditLog.action, actorLabel: auditLog.actorLabel })
		.from(auditLog)
		.where(eq(auditLog.objectId, objectId))
		.orderBy(auditLog.id);
	return rows.map((r) => r.action);
}

describe('compose', () => {
	it('pre-fills from the flag’s assessment and defaults to the order’s prescriber', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const ctx = await recs.composeContext(f.flagId);
		const [a] = await getDb().select().from(assessments).where(eq(assessments.orderId, f.orderId));
		expect(ctx).not.toBeNull();
		// The proposal is the assessment's, unchanged: meropenem band for CrCl 10–25 mL/min in the example
		// agent library (500 mg q12h; the library's band is "from memory", see fixtures/agents.json).
		expect(ctx!.proposed).toMatchObject({ doseMg: a.result.dosing.proposed!.doseMg, intervalH: 12, infusionH: 0.5 });
		expect(ctx!.proposed!.doseMg).toBe(500);
		expect(ctx!.keyNumbers.crclNowMlMin).toBe(a.crclMlMin);
		expect(ctx!.keyNumbers.crclThenMlMin).toBe(a.result.renal.crclAtStartMlMin);
		expect(ctx!.keyNumbers.albuminGL).toBe(26);
		expect(ctx!.keyNumbers.halfLifeNowH).toBe(a.result.kinetics.now!.halfLifeH);
		expect(ctx!.keyNumbers.troughMgL).toBe(a.result.kinetics.troughMgL);
		expect(ctx!.defaultRecipient).toBe(`physician:${physician.id}`);
		expect(ctx!.physicians.map((p) => p.id)).toEqual(expect.arrayContaining([physician.id, otherPhysician.id]));
		expect(ctx!.draft).toContain('Meropenem from 1,000 mg IV every 8 h');
		expect(ctx!.draft).toContain('to 500 mg every 12 h');
	});

	it('leaves the recipient to the pharmacist when the prescriber has no active account', async () => {
		const f = await createFlag(getDb(), { prescriberId: null });
		expect((await recs.composeContext(f.flagId))!.defaultRecipient).toBeNull();
	});

	it('refuses a recipient who is not an active physician, and a flag changed since loading, writing nothing', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const ctx = (await recs.composeContext(f.flagId))!;
		const outboxCount = async () =>
			(
				await getDb()
					.select({ n: sql<number>`count(*)::int` })
					.from(outboundEmails)
			)[0].n;
		const outboxBefore = await outboxCount();
		const input = {
			doseMg: 500,
			intervalH: 12,
			infusionH: 0.5,
			loadingDoseMg: null,
			physicianId: pharmacist.id,
			message: ctx.draft,
			version: ctx.flag.version
		};
		const wrongRecipient = await recs.send(f.flagId, input, who(pharmacist));
		expect(wrongRecipient).toMatchObject({ ok: false, status: 422, field: 'physicianId' });
		const stale = await recs.send(f.flagId, { ...input, physicianId: physician.id, version: ctx.flag.version + 1 }, who(pharmacist));
		expect(stale).toMatchObject({ ok: false, status: 409 });
		const written = await getDb().select().from(recommendations).where(eq(recommendations.flagId, f.flagId));
		expect(written).toHaveLength(0);
		expect((await flagRow(f.flagId)).state).toBe('new');
		expect(await outboxCount()).toBe(outboxBefore);
		expect(await auditActions(f.flagId)).toEqual([]);
	});
});

describe('one recommendation for a flag with several findings', () => {
	it('lists every finding in the draft, the e-mail and the stored recommendation, and the answer settles the whole flag', async () => {
		const f = await createFlag(getDb(), {
			prescriberId: physician.id,
			moreFindings: [
				{ ruleKey: 'aki', severity: 'high', text: 'KDIGO stage 2 acute kidney injury: creatinine 2.7 times baseline.' },
				{ ruleKey: 'half-life-prolonged', severity: 'moderate', text: 'Expected half-life 2.9 times what it was at the start.' }
			]
		});
		const ctx = (await recs.composeContext(f.flagId))!;
		expect(ctx.findings.map((x) => x.ruleKey)).toEqual(['dose_above_renal_band', 'aki', 'half-life-prolonged']);
		expect(ctx.draft).toContain('Findings:');
		expect(ctx.draft).toContain('- KDIGO stage 2 acute kidney injury');
		expect(ctx.draft).toContain('- Expected half-life 2.9 times');
		const sent = await sendOne(f);
		for (const text of ['Daily dose is above the renal band', 'KDIGO stage 2 acute kidney injury', 'Expected half-life 2.9 times'])
			expect(sent.mail.text).toContain(text);
		expect(sent.mail.text).toContain('Findings (3)');
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, sent.id));
		expect((rec.findings as { ruleKey: string }[]).map((x) => x.ruleKey)).toEqual(['dose_above_renal_band', 'aki', 'half-life-prolonged']);
		expect((await recs.listFor({ id: physician.id, role: 'physician', email: physician.email })).find((r) => r.id === sent.id)!.findings).toHaveLength(3);

		const answered = await recs.answer(
			{ via: 'link', token: sent.token, access: await confirmedAccess(getDb(), sent.token), requestId: null },
			{ outcome: 'accepted' }
		);
		expect(answered.ok).toBe(true);
		const flag = await flagRow(f.flagId);
		expect(flag).toMatchObject({ state: 'closed', outcome: 'accepted' });
		const open = await getDb()
			.select({ id: flags.id })
			.from(flags)
			.where(and(eq(flags.orderId, f.orderId), sql`${flags.state} <> 'closed'`));
		expect(open).toEqual([]);
	});
});

describe('sending and the link', () => {
	let f: FlagFixture;
	let sent: Awaited<ReturnType<typeof sendOne>>;

	beforeAll(async () => {
		f = await createFlag(getDb(), { prescriberId: physician.id });
		sent = await sendOne(f);
	});

	it('arrives once, to the prescriber, with HTML and plain text, the numbers, the caution and a working link', async () => {
		const mail: Received = sent.mail;
		expect(mail.envelopeTo).toEqual([physician.email]);
		expect(mail.subject).toBe('Dose recommendation for Meropenem: please answer');
		expect(smtp.byMessageId(messageIdFor(sent.outboxId))).toHaveLength(1);
		for (const body of [mail.text, mail.html]) {
			expect(body).toContain(`M.Q. · MRN ${f.mrn} · 3 North Medicine`);
			expect(body).toContain('500 mg every 12 h');
			expect(body).toContain('Creatinine clearance (Cockcroft–Gault)');
			expect(body).toContain('mL/min');
			expect(body).toContain(PROPOSAL_CAUTION);
			// and the caution that fits this patient: creatinine rising, doses on the lower of CG and kinetic GFR
			expect(body).toContain('Creatinine is changing');
			expect(body).toContain(`${ORIGIN}/respond/${sent.token}`);
			// default setting: initials, MRN and ward, never the name
			expect(body).not.toContain(f.familyName);
			expect(body).not.toContain(f.givenName);
		}
		// phone-friendly, self-contained HTML: no scripts, images, stylesheets or remote fonts
		expect(mail.html).toMatch(/<meta name="viewport"/);
		expect(mail.html).not.toMatch(/<script|<img|<link|@import|url\(/i);
		const opened = await recs.findByToken(sent.token, await confirmedAccess(getDb(), sent.token));
		expect(opened).toMatchObject({ state: 'open', confirmed: 'code' });
		// the answer page shows the same patient-specific caution the e-mail carried
		if (opened.state === 'open' && opened.confirmed) expect(opened.recommendation.cautions.join(' ')).toContain('Creatinine is changing');
	});

	it('stores only the token’s hash, marks the outbox row sent with its Message-ID, and keeps no usable link', async () => {
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, sent.id));
		expect(rec.tokenHash).toBe(hashToken(sent.token));
		expect(rec.tokenHash).not.toContain(sent.token);
		// 72 h by default
		expect(rec.tokenExpiresAt.getTime() - rec.createdAt.getTime()).toBeCloseTo(72 * 3_600_000, -4);
		const outbox = await outboxFor(sent.id);
		expect(outbox).toMatchObject({ status: 'sent', attempts: 1, lastError: null, smtpMessageId: messageIdFor(outbox.id) });
		expect(sent.mail.messageId).toBe(messageIdFor(outbox.id));
		expect(outbox.html).not.toContain(sent.token);
		expect(outbox.text).not.toContain(sent.token);
		expect(outbox.text).toContain('/respond/[link removed after delivery]');
	});

	it('moves the flag to recommended, with its event and the audit rows', async () => {
		const flag = await flagRow(f.flagId);
		expect(flag.state).toBe('recommended');
		expect(flag.assignedTo).toBe(pharmacist.id);
		const [event] = await getDb().select().from(flagEvents).where(eq(flagEvents.flagId, f.flagId)).orderBy(desc(flagEvents.id)).limit(1);
		expect(event).toMatchObject({ kind: 'recommended', fromState: 'new', toState: 'recommended', data: { recommendationId: sent.id } });
		expect(await auditActions(sent.id)).toEqual(['recommendation.sent']);
		expect(await auditActions(f.flagId)).toEqual(['flag.recommended']);
	});

	it('a retried job for a row already sent sends nothing', async () => {
		expect(await deliver(sent.outboxId)).toBe('already_sent');
		await new Promise((r) => setTimeout(r, 300));
		expect(smtp.byMessageId(messageIdFor(sent.outboxId))).toHaveLength(1);
	});

	it('works once: accepting closes the flag as accepted, tells the pharmacist and audits; the second use is refused', async () => {
		const first = await recs.answer(
			{ via: 'link', token: sent.token, access: await confirmedAccess(getDb(), sent.token), requestId: 'req-1' },
			{ outcome: 'accepted' }
		);
		expect(first).toEqual({ ok: true, status: 'accepted', flagClosed: true });
		const second = await recs.answer(
			{ via: 'link', token: sent.token, access: await confirmedAccess(getDb(), sent.token), requestId: 'req-2' },
			{ outcome: 'declined', reason: 'changed my mind' }
		);
		expect(second).toEqual({ ok: false, reason: 'answered' });

		const flag = await flagRow(f.flagId);
		expect(flag).toMatchObject({ state: 'closed', outcome: 'accepted' });
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, sent.id));
		expect(rec).toMatchObject({ status: 'accepted', respondedVia: 'link', responseReason: null });
		expect(rec.tokenUsedAt).not.toBeNull();
		expect(await auditActions(sent.id)).toEqual(['recommendation.sent', 'recommendation.accepted']);
		expect(await auditActions(f.flagId)).toEqual(['flag.recommended', 'flag.closed']);
		const [note] = await getDb().select().from(notifications).where(eq(notifications.userId, pharmacist.id)).orderBy(desc(notifications.createdAt)).limit(1);
		expect(note.text).toBe(`Dr Oriel Penhallow accepted your recommendation for Meropenem, MRN ${f.mrn}.`);
		expect(note.link).toBe(`/flags/${f.flagId}`);
	});

	it('after use shows only the answer given, nothing about the patient', async () => {
		const used = await recs.findByToken(sent.token);
		expect(used.state).toBe('answered');
		const shown = JSON.stringify(used);
		expect(shown).not.toContain(f.mrn);
		expect(shown).not.toContain(f.familyName);
		expect(shown).not.toContain('North');
		if (used.state === 'answered') expect(used.answer).toMatchObject({ agentName: 'Meropenem', status: 'accepted', statusLabel: 'Accepted' });
	});
});

describe('links that must fail safely', () => {
	it('an altered or truncated token opens nothing and records nothing', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		const last = sent.token.at(-1) === 'A' ? 'B' : 'A';
		const altered = sent.token.slice(0, -1) + last;
		for (const token of [altered, sent.token.slice(0, 20), `${sent.token}x`, '../../etc/passwd', '']) {
			expect(await recs.findByToken(token)).toEqual({ state: 'invalid' });
			expect(await recs.answer({ via: 'link', token, access: recs.NO_ACCESS, requestId: null }, { outcome: 'accepted' })).toEqual({
				ok: false,
				reason: 'invalid'
			});
		}
		expect((await flagRow(f.flagId)).state).toBe('recommended');
		expect(await auditActions(sent.id)).toEqual(['recommendation.sent']);
		// the real token still works afterwards
		expect((await recs.findByToken(sent.token)).state).toBe('open');
	});

	it('an expired token reveals nothing and cannot answer; the physician can still answer in the app', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		await getDb()
			.update(recommendations)
			.set({ tokenExpiresAt: new Date(Date.now() - 1000) })
			.where(eq(recommendations.id, sent.id));
		expect(await recs.findByToken(sent.token)).toEqual({ state: 'expired' });
		expect(
			await recs.answer({ via: 'link', token: sent.token, access: await confirmedAccess(getDb(), sent.token), requestId: null }, { outcome: 'accepted' })
		).toEqual({ ok: false, reason: 'expired' });
		expect((await flagRow(f.flagId)).state).toBe('recommended');
		const inApp = await recs.answer(
			{ via: 'app', id: sent.id, user: who(physician) },
			{ outcome: 'declined', reason: 'Patient going to theatre; will review tomorrow.' }
		);
		expect(inApp).toEqual({ ok: true, status: 'declined', flagClosed: true });
	});
});

describe('answers', () => {
	it('modify records the changed regimen and closes the flag as modified with it as the reason', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		const regimen = { doseMg: 750, intervalH: 12, infusionH: 3, loadingDoseMg: null };
		expect(
			await recs.answer(
				{ via: 'link', token: sent.token, access: await confirmedAccess(getDb(), sent.token), requestId: null },
				{ outcome: 'modified', regimen, note: 'Extended infusion.' }
			)
		).toMatchObject({
			ok: true,
			status: 'modified'
		});
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, sent.id));
		expect(rec.responseRegimen).toEqual(regimen);
		expect(rec.responseReason).toBe('Extended infusion.');
		expect(await flagRow(f.flagId)).toMatchObject({ state: 'closed', outcome: 'modified' });
		const [event] = await getDb().select().from(flagEvents).where(eq(flagEvents.flagId, f.flagId)).orderBy(desc(flagEvents.id)).limit(1);
		expect(event.note).toBe('Modified by the physician to 750 mg every 12 h, infused over 3 h. Extended infusion.');
		expect(await auditActions(sent.id)).toEqual(['recommendation.sent', 'recommendation.modified']);
	});

	it('decline keeps the reason on the recommendation and the flag event', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		const reason = 'Renal function recovering; levels pending.';
		expect(
			await recs.answer(
				{ via: 'link', token: sent.token, access: await confirmedAccess(getDb(), sent.token), requestId: null },
				{ outcome: 'declined', reason }
			)
		).toMatchObject({
			ok: true,
			status: 'declined'
		});
		expect(await flagRow(f.flagId)).toMatchObject({ state: 'closed', outcome: 'declined' });
		const [event] = await getDb().select().from(flagEvents).where(eq(flagEvents.flagId, f.flagId)).orderBy(desc(flagEvents.id)).limit(1);
		expect(event.note).toBe(reason);
		// the change audit records that a reason was given, not the physician's words
		const [audit] = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.objectId, sent.id), eq(auditLog.action, 'recommendation.declined')));
		expect(audit.after).toMatchObject({ status: 'declined', via: 'link', reasonGiven: true });
		expect(JSON.stringify(audit)).not.toContain('levels pending');
	});

	it('in the app only the recipient may answer; an administrator may view but not answer', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		expect(await recs.answer({ via: 'app', id: sent.id, user: who(otherPhysician) }, { outcome: 'accepted' })).toEqual({ ok: false, reason: 'not_yours' });
		expect(await recs.answer({ via: 'app', id: sent.id, user: who(admin) }, { outcome: 'accepted' })).toEqual({ ok: false, reason: 'not_yours' });
		const mine = await recs.listFor(physician);
		expect(mine.some((r) => r.id === sent.id && r.status === 'sent')).toBe(true);
		expect((await recs.listFor(otherPhysician)).some((r) => r.id === sent.id)).toBe(false);
		expect((await recs.listFor({ id: admin.id, role: 'admin', email: admin.email })).some((r) => r.id === sent.id)).toBe(true);
		// open ones come first
		const statuses = mine.map((r) => r.status);
		expect(statuses.slice(0, statuses.lastIndexOf('sent') + 1).every((s) => s === 'sent')).toBe(true);
		expect(await recs.openCountFor(physician)).toBe(mine.filter((r) => r.status === 'sent').length);
		expect(await recs.answer({ via: 'app', id: sent.id, user: who(physician) }, { outcome: 'accepted' })).toMatchObject({ ok: true });
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, sent.id));
		expect(rec.respondedVia).toBe('app');
	});

	it('an answer to a flag that has already closed is recorded and leaves the flag’s outcome alone', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		await getDb().update(flags).set({ state: 'closed', outcome: 'superseded', closedAt: new Date() }).where(eq(flags.id, f.flagId));
		expect(
			await recs.answer({ via: 'link', token: sent.token, access: await confirmedAccess(getDb(), sent.token), requestId: null }, { outcome: 'accepted' })
		).toEqual({
			ok: true,
			status: 'accepted',
			flagClosed: false
		});
		expect(await flagRow(f.flagId)).toMatchObject({ state: 'closed', outcome: 'superseded' });
	});
});

describe('exactly one e-mail', () => {
	it('two deliveries of the same row at once send one e-mail', async () => {
		const [row] = await getDb()
			.insert(outboundEmails)
			.values({ toAddress: physician.email, subject: 'Concurrency probe', html: '<p>probe</p>', text: 'probe', relatedType: 'digest', relatedId: 'probe' })
			.returning();
		const results = await Promise.all([deliver(row.id), deliver(row.id)]);
		expect(results.sort()).toEqual(['already_sent', 'sent']);
		await new Promise((r) => setTimeout(r, 300));
		expect(smtp.byMessageId(messageIdFor(row.id))).toHaveLength(1);
	});

	it('SMTP down: the job fails, is retried with growing delays, and once the relay is back exactly one e-mail arrives', { timeout: 150_000 }, async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		await smtp.stop();
		try {
			const ctx = (await recs.composeContext(f.flagId))!;
			const result = await recs.send(
				f.flagId,
				{ doseMg: 500, intervalH: 12, infusionH: 0.5, loadingDoseMg: null, physicianId: physician.id, message: ctx.draft, version: ctx.flag.version },
				who(pharmacist)
			);
			if (!result.ok) throw new Error(result.error);
			const outbox = await outboxFor(result.recommendationId);
			type JobRow = { state: string; retry_count: number; retry_delay: number; retry_backoff: boolean; start_after: Date; started_on: Date };
			const job = async () => {
				const [row] = await getDb().execute<JobRow>(
					sql`select state, retry_count, retry_delay, retry_backoff, start_after, started_on from pgboss.job where name = ${QUEUES.mailSend} and data->>'outboxId' = ${outbox.id}`
				);
				return row;
			};
			const failedAttempt = async (n: number) =>
				waitFor(
					async () => {
						const [row] = await getDb().select().from(outboundEmails).where(eq(outboundEmails.id, outbox.id));
						const j = await job();
						// pg-boss counts retries from 0: after the n-th failed attempt the job waits with retry_count n − 1
						return row.attempts === n && j.retry_count === n - 1 && j.state === 'retry' ? { row, job: j } : null;
					},
					`failed attempt ${n}`,
					60_000,
					100
				);
			// the wait pg-boss scheduled after an attempt that started at started_on (the attempt itself takes well under a second)
			const waitMs = (j: JobRow) => new Date(j.start_after).getTime() - new Date(j.started_on).getTime();

			const first = await failedAttempt(1);
			expect(first.row.status).toBe('failed');
			expect(first.row.lastError).toMatch(/ECONNREFUSED|connect/i);
			expect(first.job).toMatchObject({ retry_delay: 5, retry_backoff: true });
			// pg-boss backoff (plans.js): retryDelay × 2^n / 2 × (1 + random): 5–10 s after the first failure, 10–20 s after the second
			expect(waitMs(first.job)).toBeGreaterThanOrEqual(5_000);
			expect(waitMs(first.job)).toBeLessThanOrEqual(13_000);

			const second = await failedAttempt(2);
			expect(waitMs(second.job)).toBeGreaterThanOrEqual(10_000);
			expect(waitMs(second.job)).toBeLessThanOrEqual(23_000);
			expect(second.row.attempts).toBe(2);
			expect(smtp.byMessageId(messageIdFor(outbox.id))).toHaveLength(0);

			await smtp.start();
			const sent = await waitFor(
				async () => {
					const [row] = await getDb().select().from(outboundEmails).where(eq(outboundEmails.id, outbox.id));
					return row.status === 'sent' ? row : null;
				},
				'the e-mail once the relay is back',
				60_000
			);
			expect(sent.attempts).toBe(3);
			expect(sent.lastError).toBeNull();
			// give any stray duplicate time to arrive, then count
			await new Promise((r) => setTimeout(r, 3_000));
			const arrived = smtp.byMessageId(messageIdFor(outbox.id));
			expect(arrived).toHaveLength(1);
			expect((await recs.findByToken(tokenIn(arrived[0].text))).state).toBe('open');
			expect((await job()).state).toBe('completed');
		} finally {
			if (!smtp.child) await smtp.start();
		}
	});
});

describe('reminders', () => {
	it('reminds once after the configured hours, without an answer link', async () => {
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		const now = new Date();
		expect(await recs.remindDue(now)).toBe(0); // too early: 24 h by default
		await getDb()
			.update(recommendations)
			.set({ createdAt: new Date(now.getTime() - 25 * 3_600_000) })
			.where(eq(recommendations.id, sent.id));
		expect(await recs.remindDue(now)).toBe(1);
		expect(await recs.remindDue(now)).toBe(0);
		expect(await recs.remindDue(new Date(now.getTime() + 3_600_000))).toBe(0);
		const outbox = await outboxFor(sent.id, 'reminder');
		const [mail] = await waitFor(async () => {
			const got = smtp.byMessageId(messageIdFor(outbox.id));
			return got.length ? got : null;
		}, 'the reminder');
		expect(mail.subject).toBe('Reminder: dose recommendation for Meropenem awaits your answer');
		expect(mail.text).not.toMatch(/\/respond\//);
		expect(mail.text).toContain(`${ORIGIN}/recommendations`);
		expect(mail.text).toContain(PROPOSAL_CAUTION);
		expect(await auditActions(sent.id)).toEqual(['recommendation.sent', 'recommendation.reminded']);
		// the original link still works
		expect((await recs.findByToken(sent.token)).state).toBe('open');
	});

	it('does not remind about answered or expired recommendations', async () => {
		const f1 = await createFlag(getDb(), { prescriberId: physician.id });
		const answered = await sendOne(f1);
		await recs.answer({ via: 'link', token: answered.token, access: await confirmedAccess(getDb(), answered.token), requestId: null }, { outcome: 'accepted' });
		const f2 = await createFlag(getDb(), { prescriberId: physician.id });
		const expired = await sendOne(f2);
		const old = new Date(Date.now() - 30 * 3_600_000);
		await getDb().update(recommendations).set({ createdAt: old }).where(eq(recommendations.id, answered.id));
		await getDb()
			.update(recommendations)
			.set({ createdAt: old, tokenExpiresAt: new Date(Date.now() - 1000) })
			.where(eq(recommendations.id, expired.id));
		await recs.remindDue();
		const reminded = await getDb()
			.select({ id: recommendations.id, remindedAt: recommendations.remindedAt })
			.from(recommendations)
			.where(sql`${recommendations.id} in (${answered.id}, ${expired.id})`);
		expect(reminded.every((r) => r.remindedAt === null)).toBe(true);
	});
});

describe('settings', () => {
	it('full names go into e-mails only when an administrator enables it; the change is audited', async () => {
		const before = await settings.get();
		expect(before).toEqual({
			emailPatientDetail: 'initials_mrn_ward',
			reminderAfterH: 24,
			tokenLifetimeH: 72,
			digestCron: '0 7 * * *',
			emailRetentionDays: 30
		});
		const actor = { actorId: admin.id, actorLabel: admin.email, requestId: null };
		const saved = await settings.update({ ...before, emailPatientDetail: 'full_name', tokenLifetimeH: 48 }, actor);
		expect(saved.changed.sort()).toEqual(['emailPatientDetail', 'tokenLifetimeH']);
		const f = await createFlag(getDb(), { prescriberId: physician.id });
		const sent = await sendOne(f);
		expect(sent.mail.text).toContain(`Marisol ${f.familyName} · MRN ${f.mrn}`);
		const [rec] = await getDb().select().from(recommendations).where(eq(recommendations.id, sent.id));
		expect(rec.tokenExpiresAt.getTime() - rec.createdAt.getTime()).toBeCloseTo(48 * 3_600_000, -4);
		const [row] = await getDb().select().from(auditLog).where(eq(auditLog.action, 'settings.changed')).orderBy(desc(auditLog.id)).limit(1);
		expect(row).toMatchObject({
			actorId: admin.id,
			before: { emailPatientDetail: 'initials_mrn_ward', tokenLifetimeH: 72 },
			after: { emailPatientDetail: 'full_name', tokenLifetimeH: 48 }
		});
		await settings.update(before, actor);
		expect(await settings.get()).toEqual(before);
	});

	it('the digest runs on the configured cron in the hospital’s time zone, and a change reaches the scheduler', async () => {
		const tz = process.env.EBBLINE_TIME_ZONE ?? 'Europe/London';
		const schedule = async () => {
			const [row] = await getDb().execute<{ cron: string; timezone: string }>(
				sql`select cron, timezone from pgboss.schedule where name = ${QUEUES.digestMorning}`
			);
			return row;
		};
		expect(await digestMorning.resolveSchedule!()).toEqual({ cron: '0 7 * * *', tz });
		expect(await schedule()).toEqual({ cron: '0 7 * * *', timezone: tz });
		const actor = { actorId: admin.id, actorLabel: admin.email, requestId: null };
		const current = await settings.get();
		const saved = await settings.update({ ...current, digestCron: '30 6 * * 1-5' }, actor);
		expect(saved).toEqual({ changed: ['digestCron'], scheduleError: null });
		expect(await schedule()).toEqual({ cron: '30 6 * * 1-5', timezone: tz });
		await settings.update(current, actor);
		expect(await schedule()).toEqual({ cron: '0 7 * * *', timezone: tz });
	});
});
