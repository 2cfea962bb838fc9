// The recommendation loop after sending: nothing waits forever. A recommendation ends answered,
// withdrawn (by Ebbline when the order stops, its regimen changes or the patient goes home before the
// answer; or by the pharmacist by hand), or, when nobody answers, the physician is reminded twice and
// then the pharmacist who sent it is told (in the app and in the morning digest).
import { and, asc, eq, sql } from 'drizzle-orm';
import { alias } from 'drizzle-orm/pg-core';
import { patientLabel, type CurrentRegimen, type Regimen } from '../../recommendations/format';
import { formatProposed } from '../../format';
import type { PhoneAnswer } from '../../validation/recommendation-loop';
import * as audit from '../audit';
import { getDb, type DbOrTx } from '../db';
import { encounters, flagEvents, flags, notifications, orders, patients, recommendations, users } from '../db/schema';
import { act } from '../flags';
import * as mail from '../mail';
import { notifications as notify } from '../notifications';
import { formatDateTime, reminderEmail, toDate, type Due } from './emails';
import type { ActingUser as Who } from '../../domain/actor';
import * as settings from '../settings';
import { hashToken } from '../auth';

const HOUR_MS = 3_600_000;
/** Reminders to the physician before the sender is told. */
export const MAX_REMINDERS = 2;

const rows = <T>(result: unknown) => Array.from(result as Iterable<T>);

export type Actor = Who;

// ---------------------------------------------------------------- withdrawal

/** Why Ebbline withdraws a recommendation; the text is shown to whoever opens its link (nothing about the patient). */
export const WITHDRAWAL_REASONS = {
	order_stopped: 'The order was stopped before an answer.',
	discharged: 'The patient was discharged before an answer.',
	changed_to_proposed: 'The order was changed to the proposed regimen before an answer.',
	regimen_changed: 'The order’s regimen was changed before an answer.'
} as const;
export type WithdrawalCause = keyof typeof WITHDRAWAL_REASONS;

type Stale = {
	id: string;
	flag_id: string;
	pharmacist_id: string;
	cause: WithdrawalCause;
	flag_state: string;
	assigned_to: string | null;
	flag_version: number;
	agent_name: string;
	mrn: string;
};

/**
 * Withdraws every recommendation still waiting for an answer whose order has stopped, whose patient
 * has been discharged from the order's encounter, or whose order no longer has the regimen the
 * recommendation was written against (dose, interval, infusion time or route). Each: status
 * 'withdrawn' with the reason, an audit row by 'system', a note to the sender in the app, and its flag
 * — if it still waits as 'recommended' — back in review with whoever holds it (or new when nobody
 * does), with a flag event. Set-based (a fixed number of statements whatever the count); rows held by
 * another transaction are skipped and left to the next sweep. `orderIds` narrows the sweep to some
 * orders (the re-assessment of a batch); pass `tx` to run inside the caller's transaction.
 */
export async function withdrawStale(now = new Date(), options: { tx?: DbOrTx; orderIds?: string[] } = {}): Promise<{ withdrawn: number; ids: string[] }> {
	if (options.orderIds && options.orderIds.length === 0) return { withdrawn: 0, ids: [] };
	const run = async (tx: DbOrTx) => {
		const at = now.toISOString();
		const narrow = options.orderIds ? sql`and o.id = any(${sql.param(options.orderIds)}::uuid[])` : sql``;
		const differs = (column: string, key: string) => sql`(r.current ? ${key} and abs(o.${sql.raw(column)} - (r.current->>${key})::float8) > 1e-9)`;
		const stale = rows<Stale>(
			await tx.execute(sql`
				select r.id, r.flag_id, r.pharmacist_id, f.state as flag_state, f.assigned_to, f.version as flag_version,
					coalesce(r.current->>'agentName', 'the agent') as agent_name, p.mrn,
					case
						when o.status = 'stopped' then 'order_stopped'
						when e.discharged_at is not null and e.discharged_at <= ${at}::timestamptz then 'discharged'
						when abs(o.dose_mg - (r.proposed->>'doseMg')::float8) <= 1e-9 and abs(o.interval_h - (r.proposed->>'intervalH')::float8) <= 1e-9
							then 'changed_to_proposed'
						else 'regimen_changed'
					end as cause
				from recommendations r
				join flags f on f.id = r.flag_id
				join orders o on o.id = f.order_id
				join patients p on p.id = o.patient_id
				left join encounters e on e.id = o.encounter_id
				where r.status = 'sent' ${narrow}
					and (
						o.status = 'stopped'
						or (e.discharged_at is not null and e.discharged_at <= ${at}::timestamptz)
						or ${differs('dose_mg', 'doseMg')} or ${differs('interval_h', 'intervalH')} or ${differs('infusion_h', 'infusionH')}
						or (r.current ? 'route' and o.route::text <> r.current->>'route')
					)
				order by r.id
				for update of r skip locked`)
		);
		if (stale.length === 0) return { withdrawn: 0, ids: [] };
		await applyWithdrawals(
			tx,
			stale.map((s) => ({ ...s, reason: WITHDRAWAL_REASONS[s.cause] })),
			now,
			null
		);
		return { withdrawn: stale.length, ids: stale.map((s) => s.id) };
	};
	return options.tx ? run(options.tx) : getDb().transaction(run);
}

type Withdrawal = Omit<Stale, 'cause'> & { reason: string; cause?: WithdrawalCause };

/** The writes of a withdrawal, for many at once: recommendation, flag, flag event, note to the sender, audit. */
async function applyWithdrawals(tx: DbOrTx, list: Withdrawal[], now: Date, by: Actor | null) {
	const at = now.toISOString();
	await tx.execute(sql`
		update recommendations r set status = 'withdrawn', withdrawn_at = ${at}::timestamptz, withdrawn_by = ${by?.id ?? null},
			withdrawn_reason = v.reason, updated_at = ${at}::timestamptz
		from jsonb_to_recordset(${JSON.stringify(list.map((w) => ({ id: w.id, reason: w.reason })))}::jsonb) as v(id uuid, reason text)
		where r.id = v.id`);
	// the flag must not stay 'recommended' with nothing left to answer
	const back = list.filter((w) => w.flag_state === 'recommended');
	if (back.length > 0) {
		const moved = rows<{ id: string; state: string; assigned_to: string | null }>(
			await tx.execute(sql`
				update flags f set state = case when f.assigned_to is not null then 'in_review'::flag_state else 'new'::flag_state end,
					version = f.version + 1, updated_at = ${at}::timestamptz
				where f.id = any(${sql.param(back.map((w) => w.flag_id))}::uuid[]) and f.state = 'recommended'
				returning f.id, f.state, f.assigned_to`)
		);
		const byFlag = new Map(list.map((w) => [w.flag_id, w]));
		if (moved.length > 0) {
			await tx.insert(flagEvents).values(
				moved.map((f) => {
					const w = byFlag.get(f.id) as Withdrawal;
					return {
						flagId: f.id,
						actorId: by?.id ?? null,
						kind: 'recommendation_withdrawn',
						fromState: 'recommended' as const,
						toState: f.state as 'new' | 'in_review',
						note: w.reason,
						data: { recommendationId: w.id, reason: w.reason, ...(w.cause ? { cause: w.cause } : {}) },
						at: now
					};
				})
			);
		}
	}
	// the sender hears of it unless they withdrew it themselves
	const told = list.filter((w) => w.pharmacist_id !== by?.id);
	if (told.length > 0) {
		await tx.insert(notifications).values(
			told.map((w) => ({
				userId: w.pharmacist_id,
				text: `Your recommendation for ${w.agent_name}, MRN ${w.mrn}, was withdrawn${by ? ` by ${by.displayName}` : ''}: ${w.reason}`,
				link: `/flags/${w.flag_id}`,
				createdAt: now
			}))
		);
	}
	for (let i = 0; i < list.length; i += 1000) {
		await tx.execute(sql`
			insert into audit_log (actor_id, actor_label, action, object_type, object_id, before, after, request_id, at)
			select ${by?.id ?? null}::uuid, ${by?.email ?? 'system'}, 'recommendation.withdrawn', 'recommendation', v.id,
				jsonb_build_object('status', 'sent', 'flagState', v.flag_state),
				jsonb_build_object('status', 'withdrawn', 'cause', v.cause, 'flagId', v.flag_id),
				${by?.requestId ?? null}, ${at}::timestamptz
			from jsonb_to_recordset(${JSON.stringify(list.slice(i, i + 1000).map((w) => ({ id: w.id, cause: w.cause ?? 'by_hand', flag_id: w.flag_id, flag_state: w.flag_state })))}::jsonb)
				as v(id text, cause text, flag_id text, flag_state text)`);
	}
}

export type WithdrawResult = { ok: true } | { ok: false; status: 403 | 404 | 409 | 422; error: string; field?: string };

/**
 * A pharmacist withdraws a recommendation by hand, with a reason (shown to the physician if they open
 * the link). Only the pharmacist who sent it, or an administrator, may; only while it waits for an answer.
 */
export async function withdraw(recommendationId: string, reason: string, by: Actor, now = new Date()): Promise<WithdrawResult> {
	const text = reason.trim();
	if (text.length < 3) return { ok: false, status: 422, error: 'Give the reason for withdrawing (at least 3 characters).', field: 'reason' };
	return getDb().transaction(async (tx) => {
		const [row] = await tx
			.select({
				id: recommendations.id,
				status: recommendations.status,
				flagId: recommendations.flagId,
				pharmacistId: recommendations.pharmacistId,
				current: recommendations.current,
				flagState: flags.state,
				assignedTo: flags.assignedTo,
				flagVersion: flags.version,
				mrn: patients.mrn
			})
			.from(recommendations)
			.innerJoin(flags, eq(flags.id, recommendations.flagId))
			.innerJoin(patients, eq(patients.id, flags.patientId))
			.where(eq(recommendations.id, recommendationId))
			.for('update', { of: recommendations });
		if (!row) return { ok: false, status: 404, error: 'No recommendation with that id.' };
		if (row.pharmacistId !== by.id && by.role !== 'admin')
			return { ok: false, status: 403, error: 'Only the pharmacist who sent this recommendation (or an administrator) can withdraw it.' };
		if (row.status === 'withdrawn') return { ok: false, status: 409, error: 'This recommendation has already been withdrawn.' };
		if (row.status !== 'sent')
			return { ok: false, status: 409, error: 'The physician has already answered this recommendation; it can no longer be withdrawn.' };
		await applyWithdrawals(
			tx,
			[
				{
					id: row.id,
					flag_id: row.flagId,
					pharmacist_id: row.pharmacistId,
					flag_state: row.flagState,
					assigned_to: row.assignedTo,
					flag_version: row.flagVersion,
					agent_name: (row.current as CurrentRegimen).agentName,
					mrn: row.mrn,
					reason: text
				}
			],
			now,
			by
		);
		return { ok: true };
	});
}

/**
 * What a withdrawn recommendation's link says, in one line: when and why. Null when the token does
 * not open a withdrawn recommendation.
 */
export async function withdrawalNotice(token: string): Promise<string | null> {
	if (!/^[A-Za-z0-9_-]{43}$/.test(token)) return null;
	const [row] = await getDb()
		.select({ status: recommendations.status, withdrawnAt: recommendations.withdrawnAt, reason: recommendations.withdrawnReason })
		.from(recommendations)
		.where(eq(recommendations.tokenHash, hashToken(token)));
	if (!row || row.status !== 'withdrawn') return null;
	const when = row.withdrawnAt ? ` on ${formatDateTime(row.withdrawnAt)}` : '';
	const why = row.reason
		? ` ${row.reason
				.replace(/\s+/g, ' ')
				.trim()
				.replace(/([^.!?])$/, '$1.')}`
		: '';
	return `The stewardship team withdrew this recommendation${when}.${why} Nothing needs to be done.`;
}

/** The recommendations of one flag, newest first, for its page (what a pharmacist needs; no token). */
export async function forFlag(flagId: string) {
	const physician = alias(users, 'physician');
	const sender = alias(users, 'sender');
	const list = await getDb()
		.select({
			id: recommendations.id,
			status: recommendations.status,
			pharmacistId: recommendations.pharmacistId,
			pharmacistName: sender.displayName,
			to: sql<string>`coalesce(${recommendations.recipientName}, ${physician.displayName}, ${recommendations.recipientEmail})`,
			toEmail: sql<string | null>`coalesce(${recommendations.recipientEmail}, ${physician.email})`,
			proposed: recommendations.proposed,
			createdAt: recommendations.createdAt,
			remindedAt: recommendations.remindedAt,
			reminderCount: recommendations.reminderCount,
			escalatedAt: recommendations.escalatedAt,
			respondedAt: recommendations.respondedAt,
			withdrawnAt: recommendations.withdrawnAt,
			withdrawnReason: recommendations.withdrawnReason,
			tokenExpiresAt: recommendations.tokenExpiresAt
		})
		.from(recommendations)
		.innerJoin(sender, eq(sender.id, recommendations.pharmacistId))
		.leftJoin(physician, eq(physician.id, recommendations.physicianId))
		.where(eq(recommendations.flagId, flagId))
		.orderBy(sql`${recommendations.createdAt} desc`);
	return list.map((r) => ({ ...r, proposedText: formatProposed(r.proposed as Regimen) }));
}

// ---------------------------------------------------------------- reminders and escalation

/** The recipient's address: the one kept with the recommendation, else the physician account's (older rows). */
const recipientAddress = sql<string>`coalesce(r.recipient_email, u.email)`;

const dueColumns = sql`r.id, r.flag_id, r.pharmacist_id, ph.display_name as pharmacist_name, ${recipientAddress} as to_address,
	coalesce(r.recipient_name, u.display_name, r.recipient_email) as to_name, r.reminder_count, r.created_at, r.token_expires_at,
	r.current, r.proposed, p.given_name, p.family_name, p.mrn,
	coalesce(
		(select e.ward from encounters e where e.id = o.encounter_id),
		(select e.ward from encounters e where e.patient_id = p.id order by (e.discharged_at is not null), e.admitted_at desc limit 1)) as ward`;
const dueFrom = sql`from recommendations r
	join users ph on ph.id = r.pharmacist_id
	left join users u on u.id = r.physician_id
	join flags f on f.id = r.flag_id
	join orders o on o.id = f.order_id
	join patients p on p.id = f.patient_id`;

/**
 * Reminds the physician about recommendations still unanswered: the first reminder `reminderAfterH`
 * hours after sending, the second `reminderAfterH` after the first, never more (and never once the
 * answer link has expired). The count, the time and the reminder's outbox row commit together, and rows
 * are locked with SKIP LOCKED, so overlapping runs never send a reminder twice. Returns how many were sent.
 */
export async function remindDue(now = new Date(), limit = 100): Promise<number> {
	const s = await settings.get();
	const cutoff = new Date(now.getTime() - s.reminderAfterH * HOUR_MS).toISOString();
	return getDb().transaction(async (tx) => {
		const due = rows<Due>(
			await tx.execute(sql`
				select ${dueColumns} ${dueFrom}
				where r.status = 'sent' and r.reminder_count < ${MAX_REMINDERS} and r.token_expires_at > ${now.toISOString()}::timestamptz
					and coalesce(r.reminded_at, r.created_at) <= ${cutoff}::timestamptz
				order by r.created_at
				limit ${limit}
				for update of r skip locked`)
		);
		for (const row of due) {
			const ordinal = row.reminder_count + 1;
			await tx.update(recommendations).set({ remindedAt: now, reminderCount: ordinal, updatedAt: now }).where(eq(recommendations.id, row.id));
			const email = reminderEmail(
				row,
				patientLabel({ givenName: row.given_name, familyName: row.family_name, mrn: row.mrn, ward: row.ward }, s.emailPatientDetail),
				ordinal >= MAX_REMINDERS
			);
			const outboxId = await mail.queue(tx, { to: row.to_address, ...email, relatedType: 'reminder', relatedId: row.id, at: now });
			await audit.record(
				{
					at: now,
					actorLabel: 'system',
					action: 'recommendation.reminded',
					objectType: 'recommendation',
					objectId: row.id,
					after: { outboxId, remindedAt: now.toISOString(), reminder: ordinal }
				},
				tx
			);
		}
		return due.length;
	});
}

/**
 * Tells the sender, once, about a recommendation nobody has answered: `reminderAfterH` hours after the
 * second reminder, or once its answer link has expired (no reminder can follow). An in-app notification
 * and `escalatedAt` (the morning digest lists these), with an audit row. Returns how many were escalated.
 */
export async function escalateDue(now = new Date(), limit = 100): Promise<number> {
	const s = await settings.get();
	const at = now.toISOString();
	const cutoff = new Date(now.getTime() - s.reminderAfterH * HOUR_MS).toISOString();
	return getDb().transaction(async (tx) => {
		const due = rows<Due & { reminded_at: Date | null }>(
			await tx.execute(sql`
				select ${dueColumns}, r.reminded_at ${dueFrom}
				where r.status = 'sent' and r.escalated_at is null
					and ((r.reminder_count >= ${MAX_REMINDERS} and r.reminded_at <= ${cutoff}::timestamptz) or r.token_expires_at <= ${at}::timestamptz)
				order by r.created_at
				limit ${limit}
				for update of r skip locked`)
		);
		for (const row of due) {
			await tx.update(recommendations).set({ escalatedAt: now, updatedAt: now }).where(eq(recommendations.id, row.id));
			const why = row.reminder_count >= MAX_REMINDERS ? `after ${row.reminder_count} reminders` : 'and its answer link has expired';
			await notify.notify(
				tx,
				row.pharmacist_id,
				`No answer from ${row.to_name} to your recommendation for ${row.current.agentName}, MRN ${row.mrn}, sent ${formatDateTime(toDate(row.created_at))}, ${why}. Call them, or withdraw it from the flag.`,
				`/flags/${row.flag_id}`,
				now
			);
			await audit.record(
				{
					at: now,
					actorLabel: 'system',
					action: 'recommendation.escalated',
					objectType: 'recommendation',
					objectId: row.id,
					after: { to: row.pharmacist_id, reminders: row.reminder_count, linkExpired: toDate(row.token_expires_at) <= now, escalatedAt: at }
				},
				tx
			);
		}
		return due.length;
	});
}

/** Escalated recommendations still waiting for an answer, oldest first (the morning digest's list). */
export async function escalatedOpen(db: DbOrTx = getDb(), limit = 20) {
	const sender = alias(users, 'sender');
	const physician = alias(users, 'physician');
	return db
		.select({
			id: recommendations.id,
			flagId: recommendations.flagId,
			agentName: sql<string>`${recommendations.current}->>'agentName'`,
			to: sql<string>`coalesce(${recommendations.recipientName}, ${physician.displayName}, ${recommendations.recipientEmail})`,
			pharmacistName: sender.displayName,
			sentAt: recommendations.createdAt,
			escalatedAt: recommendations.escalatedAt,
			patient: { givenName: patients.givenName, familyName: patients.familyName, mrn: patients.mrn },
			ward: sql<string | null>`(select e.ward from ${encounters} e where e.id = ${orders.encounterId})`
		})
		.from(recommendations)
		.innerJoin(sender, eq(sender.id, recommendations.pharmacistId))
		.leftJoin(physician, eq(physician.id, recommendations.physicianId))
		.innerJoin(flags, eq(flags.id, recommendations.flagId))
		.innerJoin(orders, eq(orders.id, flags.orderId))
		.innerJoin(patients, eq(patients.id, flags.patientId))
		.where(and(eq(recommendations.status, 'sent'), sql`${recommendations.escalatedAt} is not null`))
		.orderBy(asc(recommendations.createdAt))
		.limit(limit);
}

// ---------------------------------------------------------------- answered by phone

export type PhoneAnswerResult = { ok: true; flagClosed: boolean } | { ok: false; status: 404 | 409; error: string };

/**
 * Records the physician's answer taken by telephone (when the e-mail could not reach them), inside the
 * caller's transaction: the recommendation answered via 'phone' with the outcome and note, the flag
 * closed with that outcome (as the e-mail link's answer would), the sender told in the app, and an
 * audit row naming who recorded it.
 */
export async function answerByPhone(tx: DbOrTx, recommendationId: string, given: PhoneAnswer, by: Actor, now = new Date()): Promise<PhoneAnswerResult> {
	const [rec] = await tx.select().from(recommendations).where(eq(recommendations.id, recommendationId)).for('update');
	if (!rec) return { ok: false, status: 404, error: 'The recommendation this e-mail belongs to no longer exists.' };
	if (rec.status === 'withdrawn') return { ok: false, status: 409, error: 'This recommendation has been withdrawn; there is nothing to answer.' };
	if (rec.status !== 'sent') return { ok: false, status: 409, error: 'This recommendation has already been answered.' };
	const note = given.note.trim() || null;
	await tx
		.update(recommendations)
		.set({ status: given.outcome, tokenUsedAt: now, responseRegimen: null, responseReason: note, respondedAt: now, respondedVia: 'phone', updatedAt: now })
		.where(eq(recommendations.id, rec.id));
	const doctor = rec.recipientName ?? rec.recipientEmail ?? 'The physician';
	const closeReason =
		given.outcome === 'declined'
			? `${note} (answered by telephone)`
			: given.outcome === 'modified'
				? `Modified by the physician by telephone: ${note}`
				: `Accepted by the physician by telephone${note ? `. ${note}` : '.'}`;
	const closed = await act(
		rec.flagId,
		{ kind: 'close', outcome: given.outcome, reason: closeReason },
		{ actorId: by.id, actorLabel: `${by.email} (answer by telephone)`, role: by.role, requestId: by.requestId },
		{ tx, now }
	);
	if (!closed.ok && closed.status !== 409) throw new Error(`The flag could not be closed: ${closed.error}`);
	const [pt] = await tx.select({ mrn: patients.mrn }).from(flags).innerJoin(patients, eq(patients.id, flags.patientId)).where(eq(flags.id, rec.flagId));
	const verb = { accepted: 'accepted', modified: 'accepted with changes', declined: 'declined' }[given.outcome];
	await notify.notify(
		tx,
		rec.pharmacistId,
		`${doctor} ${verb} your recommendation for ${(rec.current as CurrentRegimen).agentName}, MRN ${pt?.mrn ?? '—'}, by telephone (recorded by ${by.displayName}).`,
		`/flags/${rec.flagId}`,
		now
	);
	await audit.record(
		{
			at: now,
			actorId: by.id,
			actorLabel: by.email,
			action: `recommendation.${given.outcome}`,
			objectType: 'recommendation',
			objectId: rec.id,
			before: { status: rec.status },
			after: { status: given.outcome, via: 'phone', reasonGiven: Boolean(note), recordedBy: by.email, flagClosed: closed.ok },
			requestId: by.requestId
		},
		tx
	);
	return { ok: true, flagClosed: closed.ok };
}
