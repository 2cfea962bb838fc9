// Accounts for prescribers reached by e-mail: after answering a recommendation from its link, a
// prescriber without an Ebbline account may ask for one. A single-use link goes to the address the
// recommendation went to (so only its owner can use it); following it sets a name and password and
// creates a physician account, linked to the prescriber directory. Their earlier recommendations then
// appear under My recommendations (matched by e-mail).
import { and, eq, isNull, sql, type SQLWrapper } from 'drizzle-orm';
import * as audit from '../audit';
import { config } from '../config';
import { getDb } from '../db';
import { accountSetupTokens, prescribers, recommendations, users } from '../db/schema';
import { renderEmail } from '../mail';
import * as mail from '../mail';
import { hashPassword } from './password';
import { hashToken, randomToken } from './tokens';

const HOUR_MS = 3_600_000;
/** how long a set-up link stays valid */
export const SETUP_LINK_LIFETIME_H = 72;
const TOKEN_SHAPE = /^[A-Za-z0-9_-]{43}$/;

const emailTaken = (email: string | SQLWrapper) => sql<boolean>`exists (select 1 from ${users} u where lower(u.email) = lower(${email}))`;

export type SetupOffer = { ok: true; email: string } | { ok: false; reason: 'invalid' | 'not_answered' | 'has_account' };

/**
 * Sends a set-up link for the recipient of an answered recommendation (found by its answer-link
 * token) who has no account yet. At most one live link per address: an older unused one is replaced.
 */
export async function offerAccountSetup(answerToken: string, requestId: string | null, now = new Date()): Promise<SetupOffer> {
	if (!TOKEN_SHAPE.test(answerToken)) return { ok: false, reason: 'invalid' };
	return getDb().transaction(async (tx) => {
		const [rec] = await tx
			.select({
				id: recommendations.id,
				status: recommendations.status,
				email: recommendations.recipientEmail,
				name: recommendations.recipientName,
				prescriberId: recommendations.recipientPrescriberId,
				physicianId: recommendations.physicianId
			})
			.from(recommendations)
			.where(eq(recommendations.tokenHash, hashToken(answerToken)));
		if (!rec || !rec.email) return { ok: false, reason: 'invalid' };
		if (rec.status === 'sent' || rec.status === 'withdrawn') return { ok: false, reason: 'not_answered' };
		if (rec.physicianId) return { ok: false, reason: 'has_account' };
		const [taken] = await tx.select({ taken: emailTaken(rec.email) }).from(sql`(select 1) as one`);
		if (taken.taken) return { ok: false, reason: 'has_account' };

		await tx.delete(accountSetupTokens).where(and(sql`lower(${accountSetupTokens.email}) = lower(${rec.email})`, isNull(accountSetupTokens.usedAt)));
		const token = randomToken();
		const expiresAt = new Date(now.getTime() + SETUP_LINK_LIFETIME_H * HOUR_MS);
		const [row] = await tx
			.insert(accountSetupTokens)
			.values({ email: rec.email.toLowerCase(), prescriberId: rec.prescriberId, tokenHash: hashToken(token), expiresAt })
			.returning({ id: accountSetupTokens.id });
		const link = `${config.appUrl.replace(/\/$/, '')}/account/setup/${token}`;
		const email = renderEmail({
			title: 'Set up your Ebbline account',
			preheader: 'A single-use link to set up your account.',
			blocks: [
				{
					kind: 'paragraph',
					text: `${rec.name ?? 'Hello'}, you asked for an Ebbline account after answering a stewardship recommendation. With it you can see the recommendations sent to you and answer them in one place.`
				},
				{ kind: 'button', href: link, label: 'Set up my account' },
				{
					kind: 'paragraph',
					muted: true,
					text: `The link works once and expires in ${SETUP_LINK_LIFETIME_H} hours. If you did not ask for it, ignore this e-mail: nothing happens.`
				}
			],
			footer: 'Sent by Ebbline for the antimicrobial stewardship team.'
		});
		const outboxId = await mail.queue(tx, { to: rec.email, subject: 'Set up your Ebbline account', ...email, relatedType: 'account_setup', relatedId: row.id });
		await audit.record(
			{
				actorId: null,
				actorLabel: `${rec.email} (answer link)`,
				action: 'account.setup_offered',
				objectType: 'recommendation',
				objectId: rec.id,
				after: { email: rec.email, outboxId, expiresAt: expiresAt.toISOString() },
				requestId
			},
			tx
		);
		return { ok: true, email: rec.email };
	});
}

export type SetupLookup = { state: 'open'; email: string; name: string | null } | { state: 'invalid' | 'expired' | 'used' | 'has_account' };

/** What a set-up link leads to. */
export async function readAccountSetup(token: string, now = new Date()): Promise<SetupLookup> {
	if (!TOKEN_SHAPE.test(token)) return { state: 'invalid' };
	const [row] = await getDb()
		.select({
			email: accountSetupTokens.email,
			usedAt: accountSetupTokens.usedAt,
			expiresAt: accountSetupTokens.expiresAt,
			name: prescribers.name,
			taken: emailTaken(accountSetupTokens.email)
		})
		.from(accountSetupTokens)
		.leftJoin(prescribers, eq(prescribers.id, accountSetupTokens.prescriberId))
		.where(eq(accountSetupTokens.tokenHash, hashToken(token)));
	if (!row) return { state: 'invalid' };
	if (row.usedAt) return { state: 'used' };
	if (row.expiresAt <= now) return { state: 'expired' };
	if (row.taken) return { state: 'has_account' };
	return { state: 'open', email: row.email, name: row.name };
}

export type SetupResult = { ok: true; userId: string } | { ok: false; reason: 'invalid' | 'expired' | 'used' | 'has_account' };

/** Creates the physician account once (the token row is locked and marked used in the same transaction). */
export async function completeAccountSetup(
	token: string,
	input: { displayName: string; password: string },
	requestId: string | null,
	now = new Date()
): Promise<SetupResult> {
	if (!TOKEN_SHAPE.test(token)) return { ok: false, reason: 'invalid' };
	const passwordHash = await hashPassword(input.password);
	return getDb().transaction(async (tx) => {
		const [row] = await tx
			.select()
			.from(accountSetupTokens)
			.where(eq(accountSetupTokens.tokenHash, hashToken(token)))
			.for('update');
		if (!row) return { ok: false, reason: 'invalid' };
		if (row.usedAt) return { ok: false, reason: 'used' };
		if (row.expiresAt <= now) return { ok: false, reason: 'expired' };
		const [taken] = await tx.select({ taken: emailTaken(row.email) }).from(sql`(select 1) as one`);
		if (taken.taken) return { ok: false, reason: 'has_account' };
		const [user] = await tx
			.insert(users)
			.values({ email: row.email, displayName: input.displayName.trim(), role: 'physician', passwordHash })
			.returning({ id: users.id });
		await tx.update(accountSetupTokens).set({ usedAt: now }).where(eq(accountSetupTokens.id, row.id));
		await tx
			.update(prescribers)
			.set({ userId: user.id, updatedAt: now })
			.where(sql`lower(${prescribers.email}) = lower(${row.email})`);
		await audit.record(
			{
				actorId: user.id,
				actorLabel: `${row.email} (account set-up link)`,
				action: 'user.created',
				objectType: 'user',
				objectId: user.id,
				after: { email: row.email, displayName: input.displayName.trim(), role: 'physician', via: 'account set-up link' },
				requestId
			},
			tx
		);
		return { ok: true, userId: user.id };
	});
}
