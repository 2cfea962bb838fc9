// Nothing waits forever: timed snoozes are woken by the flag.wake job's function, recommendations are
// withdrawn when their order stops or changes or the patient is discharged (by re-assessment and by the
// sweep), a pharmacist withdraws one by hand, and unanswered ones are reminded twice and then escalated
// to the sender, who finds them in the morning digest. Times are driven by a fake `now`.
import { and, desc, eq, sql } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { auditLog, encounters, flagEvents, flags, notifications, orders, outboundEmails, recommendations } from '../../../../src/lib/server/db/schema';
import { digestEmail, snapshot } from '../../../../src/lib/server/notifications';
import { wakeDue } from '../../../../src/lib/server/flags';
import { QUEUES } from '../../../../src/lib/server/queue';
import { reassessOrders } from '../../../../src/lib/server/reassess';
import { loop } from '../../../../src/lib/server/recommendations';
import * as recs from '../../../../src/lib/server/recommendations';
import { createFlag, createUser, type FlagFixture, who } from '../../../fixtures/recommendations';
import { mailWorkers } from './smtp';

const HOUR_MS = 3_600_000;
const smtp = mailWorkers([QUEUES.mailSend], { schedules: false });
let pharmacist: Awaited<ReturnType<typeof createUser>>;
let otherPharmacist: Awaited<ReturnType<typeof createUser>>;
let physician: Awaited<ReturnType<typeof createUser>>;

const later = (from: Date, hours: number) => new Date(from.getTime() + hours * HOUR_MS);

beforeAll(async () => {
	const db = getDb();
	pharmacist = await createUser(db, 'pharmacist', 'Wenna Polglase');
	otherPharmacist = await createUser(db, 'pharmacist', 'Jory Tremayne');
	physician = await createUser(db, 'physician', 'Dr Senara Vosper');
});

async function flagRow(id: string) {
	const [row] = await getDb().select().from(flags).where(eq(flags.id, id));
	return row;
}

async function recRow(id: string) {
	const [row] = await getDb().select().from(recommendations).where(eq(recommendations.id, id));
	return row;
}

async function auditOf(objectId: string) {
	return getDb().select().from(auditLog).where(eq(auditLog.objectId, objectId)).orderBy(auditLog.id);
}

/** A claimed flag with the pre-filled recommendation sent to the physician account. */
async function sent(options: { claim?: boolean } = {}): Promise<{ fixture: FlagFixture; id: string }> {
	const fixture = await createFlag(getDb(), { prescriberId: physician.id, state: 'in_review', assignedTo: options.claim === false ? null : pharmacist.id });
	const ctx = await recs.composeContext(fixture.flagId);
	if (!ctx?.proposed) throw new Error('the fixture should propose a regimen');
	const result = await recs.send(
		fixture.flagId,
		{
			doseMg: ctx.proposed.doseMg,
			intervalH: ctx.proposed.intervalH,
			infusionH: ctx.proposed.infusionH,
			loadingDoseMg: ctx.proposed.loadingDoseMg,
			recipient: `physician:${physician.id}`,
			message: ctx.draft,
			version: ctx.flag.version
		},
		who(pharmacist)
	);
	if (!result.ok) throw new Error(result.error);
	expect((await flagRow(fixture.flagId)).state).toBe('recommended');
	return { fixture, id: result.recommendationId };
}

describe('timed snoozes', () => {
	async function snoozed(from: 'new' | 'in_review', until: Date, assignedTo: string | null) {
		const f = await createFlag(getDb(), { state: 'snoozed', snoozedUntil: until, assignedTo });
		await getDb()
			.insert(flagEvents)
			.values({
				flagId: f.flagId,
				actorId: assignedTo,
				kind: 'snoozed',
				fromState: from,
				toState: 'snoozed',
				data: { until: until.toISOString(), untilNextResult: false },
				at: later(until, -4)
			});
		return f;
	}

	it('wake when their time passes, back to the state they were snoozed from, once', async () => {
		const now = new Date();
		const reviewing = await snoozed('in_review', later(now, 2), pharmacist.id);
		const fresh = await snoozed('new', later(now, 3), null);
		const untilResult = await createFlag(getDb(), { state: 'snoozed', snoozeUntilNextResult: true });
		const before = await flagRow(reviewing.flagId);

		const early = await wakeDue(later(now, 1));
		expect(early.flagIds).not.toContain(reviewing.flagId);
		expect((await flagRow(reviewing.flagId)).state).toBe('snoozed');

		const due = await wakeDue(later(now, 4));
		expect(due.flagIds).toEqual(expect.arrayContaining([reviewing.flagId, fresh.flagId]));
		expect(due.flagIds).not.toContain(untilResult.flagId);
		const woke = await flagRow(reviewing.flagId);
		expect(woke).toMatchObject({ state: 'in_review', assignedTo: pharmacist.id, snoozedUntil: null, version: before.version + 1 });
		expect((await flagRow(fresh.flagId)).state).toBe('new');
		expect((await flagRow(untilResult.flagId)).state).toBe('snoozed');

		const [event] = await getDb().select().from(flagEvents).where(eq(flagEvents.flagId, reviewing.flagId)).orderBy(desc(flagEvents.id)).limit(1);
		expect(event).toMatchObject({ kind: 'woke', actorId: null, fromState: 'snoozed', toState: 'in_review' });
		expect(event.data).toMatchObject({ reason: 'snooze time passed' });
		expect((await auditOf(reviewing.flagId)).map((a) => [a.action, a.actorLabel])).toEqual([['flag.woke', 'system']]);

		// idempotent: a second run finds nothing more for these flags
		const again = await wakeDue(later(now, 5));
		expect(again.flagIds).not.toContain(reviewing.flagId);
		const events = await getDb()
			.select()
			.from(flagEvents)
			.where(and(eq(flagEvents.flagId, reviewing.flagId), eq(flagEvents.kind, 'woke')));
		expect(events).toHaveLength(1);
	});

	it('two workers at once wake each flag once', async () => {
		const now = new Date();
		const many = await Promise.all(Array.from({ length: 12 }, (_, i) => snoozed(i % 2 ? 'new' : 'in_review', later(now, 1), i % 2 ? null : pharmacist.id)));
		const at = later(now, 2);
		const [a, b] = await Promise.all([wakeDue(at, { limit: 7 }), wakeDue(at, { limit: 7 })]);
		const rest = await wakeDue(at);
		const all = [...a.flagIds, ...b.flagIds, ...rest.flagIds];
		const ids = many.map((f) => f.flagId);
		expect(new Set(all.filter((id) => ids.includes(id))).size).toBe(ids.length);
		expect(all.filter((id) => ids.includes(id))).toHaveLength(ids.length);
		const [{ n }] = await getDb()
			.select({ n: sql<number>`count(*)::int` })
			.from(flagEvents)
			.where(and(eq(flagEvents.kind, 'woke'), sql`${flagEvents.flagId} = any(${sql.param(ids)}::uuid[])`));
		expect(n).toBe(ids.length);
	});
});

describe('withdrawal', () => {
	it('when the order stops: re-assessment withdraws it, audited as the system, and the sender is told', async () => {
		const { fixture, id } = await sent();
		await getDb().update(orders).set({ status: 'stopped', stoppedAt: new Date() }).where(eq(orders.id, fixture.orderId));
		await reassessOrders([fixture.orderId]);
		const rec = await recRow(id);
		expect(rec).toMatchObject({ status: 'withdrawn', withdrawnBy: null, withdrawnReason: loop.WITHDRAWAL_REASONS.order_stopped });
		expect(rec.withdrawnAt).toBeInstanceOf(Date);
		const withdrawn = (await auditOf(id)).find((a) => a.action === 'recommendation.withdrawn');
		expect(withdrawn).toMatchObject({ actorLabel: 'system', actorId: null });
		expect(withdrawn!.after).toMatchObject({ cause: 'order_stopped' });
		// the flag does not stay 'recommended': a stopped order's flag closes (superseded) or goes back to review
		expect(['closed', 'in_review']).toContain((await flagRow(fixture.flagId)).state);
		const told = await getDb()
			.select()
			.from(notifications)
			.where(and(eq(notifications.userId, pharmacist.id), sql`${notifications.text} like ${'%MRN ' + fixture.mrn + '%withdrawn%'}`));
		expect(told).toHaveLength(1);
	});

	it('when its dose changes: back in review with its assignee, with a flag event; an answered one is untouched', async () => {
		const { fixture, id } = await sent();
		const answered = await sent();
		expect((await recs.answer({ via: 'app', id: answered.id, user: { ...who(physician) } }, { outcome: 'accepted' })).ok).toBe(true);
		const flagBefore = await flagRow(fixture.flagId);
		await getDb()
			.update(orders)
			.set({ doseMg: 750 })
			.where(sql`${orders.id} in (${fixture.orderId}, ${answered.fixture.orderId})`);

		const first = await loop.withdrawStale(new Date());
		expect(first.ids).toContain(id);
		expect(first.ids).not.toContain(answered.id);
		expect(await recRow(id)).toMatchObject({ status: 'withdrawn', withdrawnReason: loop.WITHDRAWAL_REASONS.regimen_changed });
		expect((await recRow(answered.id)).status).toBe('accepted');
		expect((await flagRow(answered.fixture.flagId)).state).toBe('closed');

		const flag = await flagRow(fixture.flagId);
		expect(flag).toMatchObject({ state: 'in_review', assignedTo: pharmacist.id, version: flagBefore.version + 1 });
		const [event] = await getDb().select().from(flagEvents).where(eq(flagEvents.flagId, fixture.flagId)).orderBy(desc(flagEvents.id)).limit(1);
		expect(event).toMatchObject({
			kind: 'recommendation_withdrawn',
			fromState: 'recommended',
			toState: 'in_review',
			actorId: null,
			note: loop.WITHDRAWAL_REASONS.regimen_changed
		});

		// swept again: nothing more happens
		expect((await loop.withdrawStale(new Date())).ids).not.toContain(id);
		expect((await auditOf(id)).filter((a) => a.action === 'recommendation.withdrawn')).toHaveLength(1);
	});

	it('when the order is changed to the proposed regimen, the reason says so', async () => {
		const { fixture, id } = await sent();
		const rec = await recRow(id);
		const proposed = rec.proposed as { doseMg: number; intervalH: number };
		await getDb().update(orders).set({ doseMg: proposed.doseMg, intervalH: proposed.intervalH }).where(eq(orders.id, fixture.orderId));
		await loop.withdrawStale(new Date(), { orderIds: [fixture.orderId] });
		expect((await recRow(id)).withdrawnReason).toBe(loop.WITHDRAWAL_REASONS.changed_to_proposed);
	});

	it('when the patient is discharged: the sweep withdraws it, and the link says when and why', async () => {
		const { fixture, id } = await sent({ claim: false });
		const [order] = await getDb().select().from(orders).where(eq(orders.id, fixture.orderId));
		const now = new Date();
		await getDb()
			.update(encounters)
			.set({ dischargedAt: later(now, -1) })
			.where(eq(encounters.id, order.encounterId!));
		// an unrelated order of another patient, with an open recommendation, stays as it is
		const other = await sent();
		expect((await loop.withdrawStale(now)).ids).toEqual([id]);
		expect(await recRow(id)).toMatchObject({ status: 'withdrawn', withdrawnReason: loop.WITHDRAWAL_REASONS.discharged });
		expect((await recRow(other.id)).status).toBe('sent');
		// sending made the sender its holder: back in review with them
		expect(await flagRow(fixture.flagId)).toMatchObject({ state: 'in_review', assignedTo: pharmacist.id });
	});

	it('by hand: only the sender (or an administrator), with a reason, once; the link then says why', async () => {
		const { fixture, id } = await sent();
		expect(await loop.withdraw(id, '  ', who(pharmacist))).toMatchObject({ ok: false, field: 'reason' });
		expect(await loop.withdraw(id, 'Patient moved to palliative care.', who(otherPharmacist))).toMatchObject({ ok: false, status: 403 });
		expect(await loop.withdraw(id, 'Discussed on the ward round; dose already reduced.', who(pharmacist))).toEqual({ ok: true });
		expect(await recRow(id)).toMatchObject({
			status: 'withdrawn',
			withdrawnBy: pharmacist.id,
			withdrawnReason: 'Discussed on the ward round; dose already reduced.'
		});
		expect(await loop.withdraw(id, 'Again.', who(pharmacist))).toMatchObject({ ok: false, status: 409 });
		expect((await flagRow(fixture.flagId)).state).toBe('in_review');
		const [audit] = (await auditOf(id)).filter((a) => a.action === 'recommendation.withdrawn');
		expect(audit).toMatchObject({ actorId: pharmacist.id, actorLabel: pharmacist.email });

		// the physician's answer is refused and the link names the reason
		const answer = await recs.answer({ via: 'app', id, user: who(physician) }, { outcome: 'accepted' });
		void fixture;
		expect(answer).toEqual({ ok: false, reason: 'withdrawn' });
	});

	it('the withdrawn link’s one line names when and why', async () => {
		const { fixture } = await sent();
		// reach the token through the e-mail the fake relay received
		const [outbox] = await getDb()
			.select()
			.from(outboundEmails)
			.where(
				and(
					eq(outboundEmails.relatedType, 'recommendation'),
					sql`${outboundEmails.relatedId} in (select id::text from recommendations where flag_id = ${fixture.flagId})`
				)
			);
		const { waitFor, tokenIn } = await import('./smtp');
		const { messageIdFor } = await import('../../../../src/lib/server/mail/outbox');
		const [mail] = await waitFor(async () => {
			const got = smtp.byMessageId(messageIdFor(outbox.id));
			return got.length ? got : null;
		}, 'the recommendation e-mail');
		const token = tokenIn(mail.text);
		expect(await loop.withdrawalNotice(token)).toBeNull();
		expect(await loop.withdraw(outbox.relatedId!, 'Therapy stopped after the microbiology result.', who(pharmacist))).toEqual({ ok: true });
		// the reason is kept on the flag's event; the change audit records the withdrawal without it
		const withdrawals = (await auditOf(outbox.relatedId!)).filter((a) => a.action === 'recommendation.withdrawn');
		expect(withdrawals).toHaveLength(1);
		expect(withdrawals[0].after).toMatchObject({ status: 'withdrawn', cause: 'by_hand' });
		expect(JSON.stringify(withdrawals)).not.toContain('microbiology');
		expect(await recs.findByToken(token)).toEqual({ state: 'withdrawn' });
		const notice = await loop.withdrawalNotice(token);
		expect(notice).toMatch(
			/^The stewardship team withdrew this recommendation on .+\. Therapy stopped after the microbiology result\. Nothing needs to be done\.$/
		);
		expect(notice).not.toContain(fixture.familyName);
	});
});

describe('reminders and escalation', () => {
	it('reminds twice, then tells the sender once; the digest lists it until it is answered', async () => {
		const { fixture, id } = await sent();
		const t0 = (await recRow(id)).createdAt;
		const remind = (h: number) => loop.remindDue(later(t0, h));
		const escalate = (h: number) => loop.escalateDue(later(t0, h));

		expect(await remind(23)).toBe(0);
		expect(await remind(24.1)).toBeGreaterThanOrEqual(1);
		expect(await recRow(id)).toMatchObject({ reminderCount: 1 });
		expect(await escalate(30)).toBe(0);
		// the second reminder only another 24 h after the first
		await remind(40);
		expect((await recRow(id)).reminderCount).toBe(1);
		await remind(48.2);
		expect((await recRow(id)).reminderCount).toBe(2);
		// never a third (with the link still valid, so only the limit stops it)
		await getDb()
			.update(recommendations)
			.set({ tokenExpiresAt: later(t0, 200) })
			.where(eq(recommendations.id, id));
		await remind(80);
		expect((await recRow(id)).reminderCount).toBe(2);
		const reminders = await getDb()
			.select()
			.from(outboundEmails)
			.where(and(eq(outboundEmails.relatedType, 'reminder'), eq(outboundEmails.relatedId, id)))
			.orderBy(outboundEmails.createdAt);
		expect(reminders.map((r) => r.subject)).toEqual([
			`Reminder: dose recommendation for ${fixture.agentName} awaits your answer`,
			`Second reminder: dose recommendation for ${fixture.agentName} awaits your answer`
		]);
		expect(reminders.every((r) => r.toAddress === physician.email)).toBe(true);

		// escalation: 24 h after the second reminder, not before, once
		expect((await recRow(id)).escalatedAt).toBeNull();
		await escalate(60);
		expect((await recRow(id)).escalatedAt).toBeNull();
		await escalate(72.5);
		const escalatedAt = (await recRow(id)).escalatedAt;
		expect(escalatedAt).toBeInstanceOf(Date);
		await escalate(80);
		expect((await recRow(id)).escalatedAt).toEqual(escalatedAt);
		const told = await getDb()
			.select()
			.from(notifications)
			.where(and(eq(notifications.userId, pharmacist.id), sql`${notifications.text} like ${'No answer from%MRN ' + fixture.mrn + '%'}`));
		expect(told).toHaveLength(1);
		expect(told[0].link).toBe(`/flags/${fixture.flagId}`);
		expect((await auditOf(id)).map((a) => a.action)).toEqual([
			'recommendation.sent',
			'recommendation.reminded',
			'recommendation.reminded',
			'recommendation.escalated'
		]);

		const snap = await snapshot(getDb(), new Date());
		expect(snap.escalated?.map((r) => r.id)).toContain(id);
		const { text } = digestEmail(snap, 'Wenna Polglase', 'initials_mrn_ward');
		expect(text).toContain('Unanswered after the reminders');
		expect(text).toContain(`MRN ${fixture.mrn}`);

		// answered: off the digest's list
		expect(
			(await recs.answer({ via: 'app', id, user: who(physician) }, { outcome: 'declined', reason: 'Renal function recovering on today’s result.' })).ok
		).toBe(true);
		expect((await snapshot(getDb(), new Date())).escalated?.map((r) => r.id)).not.toContain(id);
	});

	it('a recommendation whose link expired unanswered is escalated too', async () => {
		const { id } = await sent();
		await getDb()
			.update(recommendations)
			.set({ tokenExpiresAt: new Date(Date.now() - 1000) })
			.where(eq(recommendations.id, id));
		expect(await loop.remindDue(later(new Date(), 30))).toBeGreaterThanOrEqual(0);
		expect((await recRow(id)).reminderCount).toBe(0);
		await loop.escalateDue(new Date());
		expect((await recRow(id)).escalatedAt).toBeInstanceOf(Date);
	});
});
