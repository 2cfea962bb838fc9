// E-mails that failed for good (refused by the relay, or retries spent): listed for an administrator,
// who resends them (to the same or a corrected address) or, for a recommendation, records the answer
// the physician gave by telephone. The morning digest counts those still waiting.
import { and, count, desc, eq, isNull, sql, type SQL } from 'drizzle-orm';
import { alias } from 'drizzle-orm/pg-core';
import { resendSchema, type PhoneAnswer } from '../../validation/recommendation-loop';
import * as audit from '../audit';
import { getDb, type DbOrTx } from '../db';
import { flags, outboundEmails, patients, recommendations, users } from '../db/schema';
import * as mail from './outbox';
import { answerByPhone, type Actor } from '../recommendations';

/** The recommendation an outbox row belongs to (the e-mail itself or one of its reminders). */
const ofRecommendation = sql`${outboundEmails.relatedType} in ('recommendation', 'reminder') and ${recommendations.id}::text = ${outboundEmails.relatedId}`;

/**
 * Still needs someone: undeliverable, nothing done about it yet, and — for a recommendation — the
 * recommendation still waits for an answer (one answered or withdrawn meanwhile needs nothing more).
 */
export const stillOpen: SQL = sql`(${outboundEmails.status} = 'undeliverable' and ${outboundEmails.resolution} is null
	and not exists (select 1 from ${recommendations} r where ${outboundEmails.relatedType} in ('recommendation', 'reminder') and r.id::text = ${outboundEmails.relatedId} and r.status <> 'sent'))`;

export type Show = 'open' | 'settled';

const resolver = alias(users, 'resolver');

/** Undeliverable e-mails, newest first: those still needing someone ('open'), or those settled. */
export async function list(show: Show = 'open', limit = 200) {
	const found = await getDb()
		.select({
			id: outboundEmails.id,
			to: outboundEmails.toAddress,
			subject: outboundEmails.subject,
			kind: outboundEmails.relatedType,
			createdAt: outboundEmails.createdAt,
			failedAt: outboundEmails.updatedAt,
			attempts: outboundEmails.attempts,
			lastError: outboundEmails.lastError,
			resolution: outboundEmails.resolution,
			resolvedAt: outboundEmails.resolvedAt,
			resolvedBy: resolver.displayName,
			bodyRemovedAt: outboundEmails.bodyRemovedAt,
			recommendation: {
				id: recommendations.id,
				status: recommendations.status,
				flagId: recommendations.flagId,
				recipientName: recommendations.recipientName,
				agentName: sql<string | null>`${recommendations.current}->>'agentName'`,
				tokenExpiresAt: recommendations.tokenExpiresAt
			},
			patient: { givenName: patients.givenName, familyName: patients.familyName, mrn: patients.mrn }
		})
		.from(outboundEmails)
		.leftJoin(recommendations, ofRecommendation)
		.leftJoin(flags, eq(flags.id, recommendations.flagId))
		.leftJoin(patients, eq(patients.id, flags.patientId))
		.leftJoin(resolver, eq(resolver.id, outboundEmails.resolvedBy))
		.where(show === 'open' ? stillOpen : and(eq(outboundEmails.status, 'undeliverable'), sql`not ${stillOpen}`))
		.orderBy(desc(outboundEmails.updatedAt), desc(outboundEmails.id))
		.limit(limit);
	return found.map((r) => ({
		...r,
		recommendation: r.recommendation?.id ? r.recommendation : null,
		patient: r.patient?.mrn ? r.patient : null
	}));
}
export type UndeliverableRow = Awaited<ReturnType<typeof list>>[number];

/** How many undeliverable e-mails still need someone (the digest and the page's tabs). */
export async function countOpen(db: DbOrTx = getDb()): Promise<number> {
	const [row] = await db.select({ n: count() }).from(outboundEmails).where(stillOpen);
	return row?.n ?? 0;
}

export async function countSettled(db: DbOrTx = getDb()): Promise<number> {
	const [row] = await db
		.select({ n: count() })
		.from(outboundEmails)
		.where(and(eq(outboundEmails.status, 'undeliverable'), sql`not ${stillOpen}`));
	return row?.n ?? 0;
}

export type Refusal = { ok: false; status: 404 | 409 | 422; error: string; field?: string };

async function lockOpen(tx: DbOrTx, outboxId: string): Promise<{ ok: true; row: typeof outboundEmails.$inferSelect } | Refusal> {
	const [row] = await tx.select().from(outboundEmails).where(eq(outboundEmails.id, outboxId)).for('update');
	if (!row) return { ok: false, status: 404, error: 'No such e-mail.' };
	if (row.status !== 'undeliverable') return { ok: false, status: 409, error: 'This e-mail is not marked undeliverable.' };
	if (row.resolution) return { ok: false, status: 409, error: `Already dealt with (${row.resolution === 'resent' ? 'resent' : 'answered by telephone'}).` };
	return { ok: true, row };
}

async function recommendationOf(tx: DbOrTx, row: typeof outboundEmails.$inferSelect) {
	if ((row.relatedType !== 'recommendation' && row.relatedType !== 'reminder') || !row.relatedId) return null;
	const [rec] = await tx
		.select()
		.from(recommendations)
		.where(sql`${recommendations.id}::text = ${row.relatedId}`)
		.for('update');
	return rec ?? null;
}

/**
 * Queues the same e-mail again as a new outbox row (with its own mail.send job), to `to` — the same
 * address or a corrected one — and marks the undeliverable one 'resent'. For a recommendation whose
 * address was corrected, the recommendation keeps the new address, so its reminders go there too. A
 * recommendation already answered or withdrawn, or whose answer link has expired, is not resent.
 */
export async function resend(outboxId: string, to: string, by: Actor, now = new Date()): Promise<{ ok: true; outboxId: string } | Refusal> {
	const address = to.trim();
	if (!resendSchema.shape.to.safeParse(address).success)
		return { ok: false, status: 422, error: 'The address is not an e-mail address (name@example.org).', field: 'to' };
	return getDb().transaction(async (tx) => {
		const locked = await lockOpen(tx, outboxId);
		if (!locked.ok) return locked;
		const { row } = locked;
		const rec = await recommendationOf(tx, row);
		if (rec && rec.status !== 'sent')
			return {
				ok: false,
				status: 409,
				error: `The recommendation has been ${rec.status === 'withdrawn' ? 'withdrawn' : 'answered'} meanwhile; there is nothing to resend.`
			};
		if (rec && row.relatedType === 'recommendation' && rec.tokenExpiresAt <= now) {
			return {
				ok: false,
				status: 409,
				error: 'The answer link in this e-mail has expired: record the answer by telephone, or withdraw it and send a new recommendation from the flag.'
			};
		}
		const newId = await mail.queue(tx, {
			to: address,
			subject: row.subject,
			html: row.html,
			text: row.text,
			relatedType: row.relatedType as mail.OutgoingEmail['relatedType'],
			relatedId: row.relatedId ?? ''
		});
		await tx.update(outboundEmails).set({ resolution: 'resent', resolvedAt: now, resolvedBy: by.id, updatedAt: now }).where(eq(outboundEmails.id, row.id));
		const corrected = address.toLowerCase() !== row.toAddress.toLowerCase();
		if (rec && corrected) await tx.update(recommendations).set({ recipientEmail: address, updatedAt: now }).where(eq(recommendations.id, rec.id));
		await audit.record(
			{
				actorId: by.id,
				actorLabel: by.email,
				action: 'mail.resent',
				objectType: 'outbound_email',
				objectId: row.id,
				before: { to: row.toAddress, status: row.status, lastError: row.lastError },
				after: { to: address, outboxId: newId, recommendationId: rec?.id ?? null, addressCorrected: corrected },
				requestId: by.requestId
			},
			tx
		);
		return { ok: true, outboxId: newId };
	});
}

/**
 * The physician answered by telephone a recommendation whose e-mail could not be delivered: records the
 * outcome through the recommendation loop (which closes the flag), and marks this e-mail — and any
 * other undeliverable one of the same recommendation — 'answered_by_phone'.
 */
export async function answeredByPhone(outboxId: string, given: PhoneAnswer, by: Actor, now = new Date()): Promise<{ ok: true; flagClosed: boolean } | Refusal> {
	return getDb().transaction(async (tx) => {
		const locked = await lockOpen(tx, outboxId);
		if (!locked.ok) return locked;
		const rec = await recommendationOf(tx, locked.row);
		if (!rec) return { ok: false, status: 409, error: 'This e-mail does not belong to a recommendation; resend it instead.' };
		const answered = await answerByPhone(tx, rec.id, given, by, now);
		if (!answered.ok) return answered;
		const settled = await tx
			.update(outboundEmails)
			.set({ resolution: 'answered_by_phone', resolvedAt: now, resolvedBy: by.id, updatedAt: now })
			.where(
				and(
					eq(outboundEmails.status, 'undeliverable'),
					isNull(outboundEmails.resolution),
					sql`${outboundEmails.relatedType} in ('recommendation', 'reminder')`,
					eq(outboundEmails.relatedId, rec.id)
				)
			)
			.returning({ id: outboundEmails.id });
		await audit.record(
			{
				actorId: by.id,
				actorLabel: by.email,
				action: 'mail.answered_by_phone',
				objectType: 'outbound_email',
				objectId: locked.row.id,
				after: { recommendationId: rec.id, outcome: given.outcome, settled: settled.map((s) => s.id) },
				requestId: by.requestId
			},
			tx
		);
		return { ok: true, flagClosed: answered.flagClosed };
	});
}
