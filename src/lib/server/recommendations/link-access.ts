// The second step of an answer link. The link alone shows the proposal without the patient; to see who
// the patient is and to answer, its holder confirms with a 6-digit code e-mailed to the address the
// recommendation went to (no account needed). A correct code grants a short confirmation, presented by
// the browser as a cookie and valid only for that recommendation. The recommendation's own physician,
// signed in, needs no code.
import { randomInt } from 'node:crypto';
import { and, count, desc, eq, gt, isNull, sql } from 'drizzle-orm';
import { hashToken, randomToken, sameHash } from '../auth';
import { getDb, type DbOrTx } from '../db';
import { answerLinkCodes, recommendations, users } from '../db/schema';
import { queue as queueEmail } from '../mail/outbox';
import { answerCodeEmail } from './emails';
import { TOKEN_SHAPE } from './token-shape';

export const CODE_LIFETIME_MIN = 10;
export const CODE_ATTEMPTS = 5;
/** how long a confirmed browser may see the patient and answer before it needs a new code */
export const CONFIRMATION_LIFETIME_MIN = 30;
/** a new code at most once a minute, and at most this many an hour, for one recommendation */
export const CODE_RESEND_AFTER_S = 60;
export const CODES_PER_HOUR = 5;
export const CONFIRMATION_COOKIE = 'ebbline_answer';

/** What the holder of a link brings besides it: a confirmation cookie, and perhaps a signed-in account. */
export type LinkAccess = { confirmation: string | null; user: { id: string; email: string; role: string } | null };
export const NO_ACCESS: LinkAccess = { confirmation: null, user: null };

/** How the holder may see the patient: a confirmed code, their own account, or not (yet). */
export type Confirmed = 'code' | 'account' | false;

type LinkedRec = { id: string; physicianId: string | null; recipientEmail: string | null };

/** The code's hash is bound to its recommendation: the same six digits for another one hash differently. */
const codeHash = (recommendationId: string, code: string) => hashToken(`${recommendationId}:${code}`);

export async function confirmedFor(db: DbOrTx, rec: LinkedRec, access: LinkAccess, now = new Date()): Promise<Confirmed> {
	const user = access.user;
	if (user?.role === 'physician' && (rec.physicianId === user.id || (!rec.physicianId && rec.recipientEmail?.toLowerCase() === user.email.toLowerCase())))
		return 'account';
	if (!access.confirmation || !TOKEN_SHAPE.test(access.confirmation)) return false;
	const [row] = await db
		.select({ id: answerLinkCodes.id })
		.from(answerLinkCodes)
		.where(
			and(
				eq(answerLinkCodes.recommendationId, rec.id),
				eq(answerLinkCodes.confirmationHash, hashToken(access.confirmation)),
				gt(answerLinkCodes.confirmedUntil, now)
			)
		);
	return row ? 'code' : false;
}

/** A confirmation for a recommendation (after a correct code; the demo history's physicians use it directly). */
export async function grantConfirmation(db: DbOrTx, recommendationId: string, now = new Date(), codeRowId?: string) {
	const confirmation = randomToken();
	const until = new Date(now.getTime() + CONFIRMATION_LIFETIME_MIN * 60_000);
	const values = { usedAt: now, confirmationHash: hashToken(confirmation), confirmedUntil: until };
	if (codeRowId) await db.update(answerLinkCodes).set(values).where(eq(answerLinkCodes.id, codeRowId));
	else await db.insert(answerLinkCodes).values({ recommendationId, codeHash: null, codeExpiresAt: now, ...values });
	return { confirmation, until };
}

/** The link's recommendation and whether a code may be asked for or checked now. */
async function openRec(db: DbOrTx, token: string, now: Date, lock = false) {
	if (!TOKEN_SHAPE.test(token)) return { state: 'invalid' as const };
	const query = db
		.select({
			id: recommendations.id,
			flagId: recommendations.flagId,
			status: recommendations.status,
			tokenExpiresAt: recommendations.tokenExpiresAt,
			tokenRevokedAt: recommendations.tokenRevokedAt,
			physicianActive: users.active,
			email: sql<string>`coalesce(${recommendations.recipientEmail}, ${users.email})`
		})
		.from(recommendations)
		.leftJoin(users, eq(users.id, recommendations.physicianId))
		.where(eq(recommendations.tokenHash, hashToken(token)));
	const [rec] = lock ? await query.for('update', { of: recommendations }) : await query;
	if (!rec) return { state: 'invalid' as const };
	if (rec.status === 'withdrawn') return { state: 'withdrawn' as const };
	if (rec.tokenRevokedAt || rec.physicianActive === false) return { state: 'revoked' as const };
	if (rec.status !== 'sent') return { state: 'answered' as const };
	if (rec.tokenExpiresAt <= now) return { state: 'expired' as const };
	return { state: 'open' as const, rec };
}

type Closed = 'invalid' | 'withdrawn' | 'revoked' | 'answered' | 'expired';

/** "o•••@hospital.example": enough for the holder to know where to look, not the address itself. */
export function maskEmail(email: string): string {
	const [local, domain] = email.split('@');
	return domain ? `${local.slice(0, 1)}•••@${domain}` : '•••';
}

export type CodeRequest = { ok: true; sentTo: string; recommendationId: string; flagId: string } | { ok: false; reason: Closed | 'too_soon' | 'too_many' };

/**
 * E-mails a new code to the address the recommendation went to (never one the holder gives), replacing
 * any earlier one. At most one a minute and five an hour per recommendation.
 */
export async function requestCode(token: string, now = new Date()): Promise<CodeRequest> {
	return getDb().transaction(async (tx) => {
		const found = await openRec(tx, token, now, true);
		if (found.state !== 'open') return { ok: false, reason: found.state };
		const { rec } = found;
		const [recent] = await tx
			.select({ n: count(), last: sql<Date | null>`max(${answerLinkCodes.createdAt})` })
			.from(answerLinkCodes)
			.where(
				and(
					eq(answerLinkCodes.recommendationId, rec.id),
					sql`${answerLinkCodes.codeHash} is not null`,
					gt(answerLinkCodes.createdAt, new Date(now.getTime() - 3_600_000))
				)
			);
		const last = recent?.last ? new Date(recent.last) : null;
		if (last && now.getTime() - last.getTime() < CODE_RESEND_AFTER_S * 1000) return { ok: false, reason: 'too_soon' };
		if ((recent?.n ?? 0) >= CODES_PER_HOUR) return { ok: false, reason: 'too_many' };

		// one code at a time: the earlier ones stop working
		await tx
			.update(answerLinkCodes)
			.set({ usedAt: now })
			.where(and(eq(answerLinkCodes.recommendationId, rec.id), isNull(answerLinkCodes.usedAt), sql`${answerLinkCodes.codeHash} is not null`));
		const code = String(randomInt(0, 1_000_000)).padStart(6, '0');
		await tx.insert(answerLinkCodes).values({
			recommendationId: rec.id,
			codeHash: codeHash(rec.id, code),
			codeExpiresAt: new Date(now.getTime() + CODE_LIFETIME_MIN * 60_000),
			createdAt: now
		});
		await queueEmail(tx, { to: rec.email, ...answerCodeEmail(code, CODE_LIFETIME_MIN), relatedType: 'answer_code', relatedId: rec.id, at: now });
		return { ok: true, sentTo: maskEmail(rec.email), recommendationId: rec.id, flagId: rec.flagId };
	});
}

export type CodeCheck =
	| { ok: true; confirmation: string; until: Date; recommendationId: string; flagId: string }
	| { ok: false; reason: Closed | 'no_code' | 'code_expired' | 'wrong'; attemptsLeft?: number; recommendationId?: string; flagId?: string };

/**
 * Checks a code against the newest one sent for the link's recommendation: valid for 10 minutes, used
 * once, and spent after five wrong tries (a new one can then be asked for).
 */
export async function confirmCode(token: string, given: string, now = new Date()): Promise<CodeCheck> {
	return getDb().transaction(async (tx) => {
		const found = await openRec(tx, token, now);
		if (found.state !== 'open') return { ok: false, reason: found.state };
		const { rec } = found;
		const ids = { recommendationId: rec.id, flagId: rec.flagId };
		const [row] = await tx
			.select()
			.from(answerLinkCodes)
			.where(and(eq(answerLinkCodes.recommendationId, rec.id), isNull(answerLinkCodes.usedAt), sql`${answerLinkCodes.codeHash} is not null`))
			.orderBy(desc(answerLinkCodes.createdAt))
			.limit(1)
			.for('update');
		if (!row || !row.codeHash) return { ok: false, reason: 'no_code', ...ids };
		if (row.codeExpiresAt <= now) return { ok: false, reason: 'code_expired', ...ids };
		const code = given.replace(/\s+/g, '');
		if (!/^\d{6}$/.test(code) || !sameHash(codeHash(rec.id, code), row.codeHash)) {
			const attempts = row.attempts + 1;
			await tx
				.update(answerLinkCodes)
				.set({ attempts, ...(attempts >= CODE_ATTEMPTS ? { usedAt: now } : {}) })
				.where(eq(answerLinkCodes.id, row.id));
			return { ok: false, reason: 'wrong', attemptsLeft: Math.max(0, CODE_ATTEMPTS - attempts), ...ids };
		}
		const granted = await grantConfirmation(tx, rec.id, now, row.id);
		return { ok: true, ...granted, ...ids };
	});
}
