// The physician's answer: recorded once (through the signed link or in the app), closing the flag with
// the matching outcome and telling the pharmacist.
import { eq } from 'drizzle-orm';
import { type CurrentRegimen } from '../../recommendations/format';
import { formatProposed } from '../../format';
import type { Answer } from '../../validation/recommendations';
import * as audit from '../audit';
import { hashToken } from '../auth';
import { getDb, type DbOrTx } from '../db';
import { flags, patients, recommendations, users } from '../db/schema';
import { act } from '../flags';
import { notifications } from '../notifications';
import { confirmedFor, type LinkAccess } from './link-access';
import { TOKEN_SHAPE } from './token-shape';
import type { ActingUser as Who } from '../../domain/actor';

export type AnswerResult =
	| { ok: true; status: 'accepted' | 'modified' | 'declined'; flagClosed: boolean }
	| { ok: false; reason: 'invalid' | 'expired' | 'answered' | 'withdrawn' | 'revoked' | 'unconfirmed' | 'not_yours' };

/** Through the link its holder must have confirmed (a code, or signed in as its physician): see link-access.ts. */
export type AnswerVia = { via: 'link'; token: string; access: LinkAccess; requestId: string | null } | { via: 'app'; id: string; user: Who };

function closeReason(answer: Answer): string | null {
	if (answer.outcome === 'declined') return answer.reason;
	if (answer.outcome === 'modified') return `Modified by the physician to ${formatProposed(answer.regimen)}${answer.note ? `. ${answer.note}` : ''}`;
	return null;
}

/**
 * Who is answering: the signed-in physician, the recommendation's physician account, or — for a
 * prescriber reached by e-mail without an account — the name and address it was sent to (no user id).
 */
async function answeringDoctor(
	tx: DbOrTx,
	rec: typeof recommendations.$inferSelect,
	target: AnswerVia
): Promise<{ id: string | null; email: string; displayName: string }> {
	if (target.via === 'app') return { id: target.user.id, email: target.user.email, displayName: target.user.displayName };
	if (rec.physicianId) {
		const [account] = await tx.select({ id: users.id, email: users.email, displayName: users.displayName }).from(users).where(eq(users.id, rec.physicianId));
		if (account) return account;
	}
	return { id: null, email: rec.recipientEmail ?? 'unknown recipient', displayName: rec.recipientName ?? rec.recipientEmail ?? 'The prescriber' };
}

async function physicianDeactivated(tx: DbOrTx, physicianId: string | null): Promise<boolean> {
	if (!physicianId) return false;
	const [row] = await tx.select({ active: users.active }).from(users).where(eq(users.id, physicianId));
	return row?.active === false;
}

/**
 * Records the physician's answer once (the row is locked and must still be 'sent'), closes the flag
 * with the matching outcome, tells the pharmacist in the app and writes the audit row, in one
 * transaction. A flag that has already closed (superseded by a later result) keeps its outcome; the
 * answer is still recorded.
 */
export async function answer(target: AnswerVia, given: Answer, now = new Date()): Promise<AnswerResult> {
	return getDb().transaction(async (tx) => {
		const where =
			target.via === 'link'
				? TOKEN_SHAPE.test(target.token)
					? eq(recommendations.tokenHash, hashToken(target.token))
					: undefined
				: eq(recommendations.id, target.id);
		if (!where) return { ok: false, reason: 'invalid' };
		const [rec] = await tx.select().from(recommendations).where(where).for('update');
		if (!rec) return { ok: false, reason: 'invalid' };
		if (target.via === 'app' && rec.physicianId !== target.user.id && rec.recipientEmail?.toLowerCase() !== target.user.email.toLowerCase())
			return { ok: false, reason: 'not_yours' };
		if (rec.status === 'withdrawn') return { ok: false, reason: 'withdrawn' };
		if (target.via === 'link' && (rec.tokenRevokedAt || (await physicianDeactivated(tx, rec.physicianId)))) return { ok: false, reason: 'revoked' };
		if (rec.status !== 'sent' || rec.tokenUsedAt) return { ok: false, reason: 'answered' };
		if (target.via === 'link' && rec.tokenExpiresAt <= now) return { ok: false, reason: 'expired' };
		if (target.via === 'link' && !(await confirmedFor(tx, rec, target.access, now))) return { ok: false, reason: 'unconfirmed' };

		const doctor = await answeringDoctor(tx, rec, target);
		const regimen = given.outcome === 'modified' ? given.regimen : null;
		const reason = given.outcome === 'declined' ? given.reason : given.outcome === 'modified' ? given.note || null : null;
		await tx
			.update(recommendations)
			.set({
				status: given.outcome,
				tokenUsedAt: now,
				responseRegimen: regimen,
				responseReason: reason,
				respondedAt: now,
				respondedVia: target.via,
				updatedAt: now
			})
			.where(eq(recommendations.id, rec.id));

		const label = target.via === 'link' ? `${doctor.email} (answer link)` : doctor.email;
		const requestId = target.via === 'link' ? target.requestId : target.user.requestId;
		const closed = await act(
			rec.flagId,
			{ kind: 'close', outcome: given.outcome, reason: closeReason(given) },
			{ actorId: doctor.id, actorLabel: label, role: 'physician', requestId },
			{ tx, now }
		);
		if (!closed.ok && closed.status !== 409) throw new Error(`The flag could not be closed: ${closed.error}`);

		const current = rec.current as CurrentRegimen;
		const [pt] = await tx.select({ mrn: patients.mrn }).from(flags).innerJoin(patients, eq(patients.id, flags.patientId)).where(eq(flags.id, rec.flagId));
		const verb = { accepted: 'accepted', modified: 'accepted with changes', declined: 'declined' }[given.outcome];
		const detail = given.outcome === 'modified' ? ` (${formatProposed(given.regimen)})` : given.outcome === 'declined' ? `: “${given.reason}”` : '';
		await notifications.notify(
			tx,
			rec.pharmacistId,
			`${doctor.displayName} ${verb} your recommendation for ${current.agentName}, MRN ${pt?.mrn ?? '—'}${detail}.`,
			`/flags/${rec.flagId}`,
			now
		);
		await audit.record(
			{
				at: now,
				actorId: doctor.id,
				actorLabel: label,
				action: `recommendation.${given.outcome}`,
				objectType: 'recommendation',
				objectId: rec.id,
				before: { status: rec.status },
				// the physician's reason or note is kept on the recommendation, not copied into the audit log
				after: { status: given.outcome, via: target.via, regimen, reasonGiven: reason !== null, flagClosed: closed.ok },
				requestId
			},
			tx
		);
		return { ok: true, status: given.outcome, flagClosed: closed.ok };
	});
}
