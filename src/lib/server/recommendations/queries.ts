// Reading recommendations: one detail query behind the pages (by link token, a physician's own list,
// the open count in the navigation); a view that never carries the token hash.
import { and, count, desc, eq, sql, type SQL } from 'drizzle-orm';
import { alias } from 'drizzle-orm/pg-core';
import {
	keyNumberRows,
	patientLabel,
	RESPONSE_LABELS,
	type CurrentRegimen,
	type KeyNumbers,
	type RecommendedFinding,
	type Regimen
} from '../../recommendations/format';
import { hashToken } from '../auth';
import { getDb, type DbOrTx } from '../db';
import { encounters, flags, orders, patients, recommendations, users } from '../db/schema';
import * as settings from '../settings';
import { formatDateTime } from './emails';
import { confirmedFor, NO_ACCESS, type LinkAccess } from './link-access';
import { TOKEN_SHAPE } from './token-shape';

export { TOKEN_SHAPE };

/** The ward of the order's encounter, else the patient's latest (open first) encounter. */
export const wardOf = sql<string | null>`coalesce(
	(select e.ward from ${encounters} e where e.id = ${orders.encounterId}),
	(select e.ward from ${encounters} e where e.patient_id = ${patients.id} order by (e.discharged_at is not null), e.admitted_at desc limit 1)
)`;

const pharmacist = alias(users, 'pharmacist');
const physician = alias(users, 'physician');

function detailQuery(db: DbOrTx, where: SQL | undefined) {
	return db
		.select({
			id: recommendations.id,
			flagId: recommendations.flagId,
			status: recommendations.status,
			message: recommendations.message,
			current: recommendations.current,
			proposed: recommendations.proposed,
			keyNumbers: recommendations.keyNumbers,
			findings: recommendations.findings,
			tokenExpiresAt: recommendations.tokenExpiresAt,
			tokenRevokedAt: recommendations.tokenRevokedAt,
			physicianActive: physician.active,
			recipientEmail: recommendations.recipientEmail,
			responseRegimen: recommendations.responseRegimen,
			responseReason: recommendations.responseReason,
			respondedAt: recommendations.respondedAt,
			respondedVia: recommendations.respondedVia,
			remindedAt: recommendations.remindedAt,
			createdAt: recommendations.createdAt,
			finding: flags.finding,
			severity: flags.severity,
			flagState: flags.state,
			physicianId: recommendations.physicianId,
			/** who it went to: the recipient kept with it, else the physician account's name and address */
			physicianName: sql<string>`coalesce(${recommendations.recipientName}, ${physician.displayName})`,
			physicianEmail: sql<string>`coalesce(${recommendations.recipientEmail}, ${physician.email})`,
			recipientChoice: recommendations.recipientChoice,
			withdrawnAt: recommendations.withdrawnAt,
			withdrawnReason: recommendations.withdrawnReason,
			pharmacistId: recommendations.pharmacistId,
			pharmacistName: pharmacist.displayName,
			pharmacistEmail: pharmacist.email,
			patient: { givenName: patients.givenName, familyName: patients.familyName, mrn: patients.mrn },
			ward: wardOf
		})
		.from(recommendations)
		.innerJoin(flags, eq(flags.id, recommendations.flagId))
		.innerJoin(orders, eq(orders.id, flags.orderId))
		.innerJoin(patients, eq(patients.id, flags.patientId))
		.innerJoin(pharmacist, eq(pharmacist.id, recommendations.pharmacistId))
		.leftJoin(physician, eq(physician.id, recommendations.physicianId))
		.where(where);
}

type DetailRow = Awaited<ReturnType<typeof detailQuery>>[number];

/** What a page may show of a recommendation: never the token hash. */
export function toView(row: DetailRow, patient: string) {
	const current = row.current as CurrentRegimen;
	return {
		id: row.id,
		flagId: row.flagId,
		status: row.status,
		statusLabel: RESPONSE_LABELS[row.status],
		agentName: current.agentName,
		patient,
		finding: row.finding,
		severity: row.severity,
		/** the findings the recommendation was sent for (the flag's headline for one sent before they were kept) */
		findings: (row.findings as RecommendedFinding[]).length
			? (row.findings as RecommendedFinding[])
			: [{ ruleKey: '', ruleTitle: '', severity: row.severity, text: row.finding }],
		message: row.message,
		current,
		proposed: row.proposed as Regimen,
		keyNumberRows: keyNumberRows(row.keyNumbers as KeyNumbers),
		cautions: (row.keyNumbers as KeyNumbers).cautions ?? [],
		pharmacistName: row.pharmacistName,
		pharmacistEmail: row.pharmacistEmail,
		physicianId: row.physicianId,
		physicianName: row.physicianName,
		sentAt: row.createdAt,
		expiresAt: row.tokenExpiresAt,
		remindedAt: row.remindedAt,
		respondedAt: row.respondedAt,
		respondedVia: row.respondedVia,
		responseRegimen: row.responseRegimen as Regimen | null,
		responseReason: row.responseReason
	};
}
export type RecommendationView = ReturnType<typeof toView>;

/** The letter as the prescriber received it: shown in their list and behind the answer link. */
export function letterOf(r: RecommendationView) {
	return {
		agentName: r.agentName,
		patient: r.patient,
		findings: r.findings,
		message: r.message,
		current: r.current,
		proposed: r.proposed,
		keyNumberRows: r.keyNumberRows,
		pharmacistName: r.pharmacistName,
		pharmacistEmail: r.pharmacistEmail,
		sent: formatDateTime(r.sentAt)
	};
}

/**
 * What the link alone shows, before its holder has confirmed: enough to weigh the proposal (agent,
 * current and proposed regimen, key numbers, cautions) and nothing that names the patient, nor the
 * pharmacist's own words (which may).
 */
export function previewOf(r: RecommendationView) {
	return {
		agentName: r.agentName,
		current: r.current,
		proposed: r.proposed,
		keyNumberRows: r.keyNumberRows,
		cautions: r.cautions,
		expiresAt: r.expiresAt
	};
}
export type LinkPreview = ReturnType<typeof previewOf>;

export type TokenLookup =
	| { state: 'invalid' }
	| { state: 'expired' }
	| { state: 'withdrawn' }
	/** the physician's account was deactivated: the link answers like an expired one */
	| { state: 'revoked' }
	| {
			state: 'answered';
			answer: {
				agentName: string;
				status: keyof typeof RESPONSE_LABELS;
				statusLabel: string;
				respondedAt: Date | null;
				regimen: Regimen | null;
				reason: string | null;
			};
			canSetUpAccount: boolean;
	  }
	/** not confirmed yet: the proposal without the patient; ids for the access log, never shown */
	| { state: 'open'; confirmed: false; ids: { id: string; flagId: string }; preview: LinkPreview }
	| { state: 'open'; confirmed: 'code' | 'account'; recommendation: RecommendationView };

/**
 * What a link's token opens for its holder. Unknown (altered), expired, withdrawn and revoked links
 * say nothing about the patient; a used link shows only the answer already given; an open one shows
 * the patient and the pharmacist's message only once its holder has confirmed (link-access.ts).
 */
export async function findByToken(token: string, access: LinkAccess = NO_ACCESS, now = new Date()): Promise<TokenLookup> {
	if (!TOKEN_SHAPE.test(token)) return { state: 'invalid' };
	const db = getDb();
	const [row] = await detailQuery(db, eq(recommendations.tokenHash, hashToken(token)));
	if (!row) return { state: 'invalid' };
	if (row.status === 'withdrawn') return { state: 'withdrawn' };
	if (row.tokenRevokedAt || row.physicianActive === false) return { state: 'revoked' };
	if (row.status !== 'sent') {
		return {
			state: 'answered',
			answer: {
				agentName: (row.current as CurrentRegimen).agentName,
				status: row.status,
				statusLabel: RESPONSE_LABELS[row.status],
				respondedAt: row.respondedAt,
				regimen: row.responseRegimen as Regimen | null,
				reason: row.responseReason
			},
			/** a prescriber reached by e-mail, with no account yet, may ask for one */
			canSetUpAccount: row.physicianId === null && !(await accountExists(row.physicianEmail))
		};
	}
	if (row.tokenExpiresAt <= now) return { state: 'expired' };
	const confirmed = await confirmedFor(db, row, access, now);
	if (!confirmed) return { state: 'open', confirmed: false, ids: { id: row.id, flagId: row.flagId }, preview: previewOf(toView(row, '')) };
	const s = await settings.get();
	return { state: 'open', confirmed, recommendation: toView(row, patientLabel({ ...row.patient, ward: row.ward }, s.emailPatientDetail)) };
}

async function accountExists(email: string): Promise<boolean> {
	const [row] = await getDb()
		.select({ id: users.id })
		.from(users)
		.where(sql`lower(${users.email}) = lower(${email})`);
	return Boolean(row);
}

/** A physician's own recommendations (an administrator sees everyone's): open first, then history. */
export async function listFor(user: { id: string; role: string; email: string }) {
	const where = user.role === 'admin' ? undefined : mineWhere(user);
	const rows = await detailQuery(getDb(), where).orderBy(
		sql`case when ${recommendations.status} = 'sent' then 0 else 1 end`,
		sql`case when ${recommendations.status} = 'sent' then ${recommendations.createdAt} end asc`,
		desc(sql`coalesce(${recommendations.respondedAt}, ${recommendations.createdAt})`)
	);
	// Signed in, inside the hospital's app: the patient's full name is shown.
	return rows.map((row) => toView(row, patientLabel({ ...row.patient, ward: row.ward }, 'full_name')));
}

/**
 * A physician's recommendations: sent to their account, or to their e-mail before they had one (a
 * prescriber who later sets up an account sees their history).
 */
function mineWhere(user: { id: string; email: string }): SQL {
	return sql`(${recommendations.physicianId} = ${user.id} or lower(${recommendations.recipientEmail}) = lower(${user.email}))`;
}

export async function openCountFor(user: { id: string; email: string }): Promise<number> {
	const [row] = await getDb()
		.select({ n: count() })
		.from(recommendations)
		.where(and(mineWhere(user), eq(recommendations.status, 'sent')));
	return row?.n ?? 0;
}
