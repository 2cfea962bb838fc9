// Recommendations: composed from a flag's assessment, sent to the prescriber by e-mail through the
// outbox, answered once through a signed link (or in the app), which closes the flag.
import type { ActingUser } from '../../domain/actor';
import { and, asc, count, desc, eq, sql, type SQL } from 'drizzle-orm';
import { alias } from 'drizzle-orm/pg-core';
import { PROPOSAL_CAUTION } from '../../clinical/trace';
import type { AgentParams, Assessment } from '../../clinical/types';
import {
	draftMessage,
	keyNumberRows,
	patientLabel,
	RESPONSE_LABELS,
	SEVERITY_TEXT,
	type CurrentRegimen,
	type KeyNumbers,
	type RecommendedFinding,
	type Regimen
} from '../../recommendations/format';
import { formatDateTimeZoned, formatProposed, formatRegimen } from '../../format';
import { recipientOf, type Answer, type ComposeInput } from '../../validation/recommendations';
import * as audit from '../audit/record';
import { config } from '../config';
import { getDb, type DbOrTx } from '../db';
import { agents, assessments, encounters, flags, orders, patients, prescribers, recommendations, users } from '../db/schema';
import { renderEmail, type EmailBlock } from '../mail';
import { act, type FlagActor, listFindings } from '../flags';
import { ruleTitles } from '../rules';
import * as mail from '../mail/outbox';
import { notifications } from '../notifications';
import * as settings from '../settings';
import { hashToken, randomToken } from '../auth';

/** The clinical core's caution, shown beside every proposed regimen (page and e-mail). */
export { PROPOSAL_CAUTION };

export type Who = ActingUser;

const HOUR_MS = 3_600_000;

/** The ward of the order's encounter, else the patient's latest (open first) encounter. */
const wardOf = sql<string | null>`coalesce(
	(select e.ward from ${encounters} e where e.id = ${orders.encounterId}),
	(select e.ward from ${encounters} e where e.patient_id = ${patients.id} order by (e.discharged_at is not null), e.admitted_at desc limit 1)
)`;

export const formatDateTime = (at: Date, timeZone = config.hospitalTimeZone) => formatDateTimeZoned(at, timeZone);

function keyNumbersFrom(result: Omit<Assessment, 'trace'>, at: Date, params: AgentParams): KeyNumbers {
	return {
		assessedAt: at.toISOString(),
		crclThenMlMin: result.renal?.crclAtStartMlMin ?? null,
		crclNowMlMin: result.renal?.crclMlMin ?? null,
		albuminGL: result.albumin?.latestGL ?? null,
		halfLifeThenH: result.kinetics?.atStart?.halfLifeH ?? null,
		halfLifeNowH: result.kinetics?.now?.halfLifeH ?? null,
		troughMgL: result.kinetics?.troughMgL ?? null,
		auc24MgHL: result.kinetics?.auc24MgHL ?? null,
		troughMaxMgL: params.troughMaxMgL ?? null,
		aucTargetMgHL: params.aucTargetMgHL ?? null,
		cautions: result.dosing?.cautions ?? []
	};
}

// ---------------------------------------------------------------- compose

async function flagContext(db: DbOrTx, flagId: string) {
	const [row] = await db
		.select({
			flag: {
				id: flags.id,
				state: flags.state,
				outcome: flags.outcome,
				severity: flags.severity,
				finding: flags.finding,
				suggestedAction: flags.suggestedAction,
				ruleKey: flags.ruleKey,
				assignedTo: flags.assignedTo,
				version: flags.version,
				openedAt: flags.openedAt
			},
			order: {
				id: orders.id,
				doseMg: orders.doseMg,
				intervalH: orders.intervalH,
				infusionH: orders.infusionH,
				route: orders.route,
				status: orders.status,
				startAt: orders.startAt,
				prescriberId: orders.prescriberId,
				prescriberName: orders.prescriberName,
				practitionerId: orders.practitionerId
			},
			agent: { name: agents.name, params: agents.params },
			patient: { id: patients.id, givenName: patients.givenName, familyName: patients.familyName, mrn: patients.mrn },
			ward: wardOf,
			assessment: { id: assessments.id, at: assessments.at, complete: assessments.complete, result: assessments.result }
		})
		.from(flags)
		.innerJoin(orders, eq(orders.id, flags.orderId))
		.innerJoin(agents, eq(agents.id, orders.agentId))
		.innerJoin(patients, eq(patients.id, flags.patientId))
		.innerJoin(assessments, eq(assessments.id, flags.assessmentId))
		.where(eq(flags.id, flagId));
	return row;
}

/** The findings a recommendation lists: the flag's open ones, worst first, with rule titles. */
async function openFindingsOf(db: DbOrTx, flagId: string): Promise<RecommendedFinding[]> {
	const [findings, title] = await Promise.all([listFindings(flagId, db), ruleTitles(db)]);
	return findings.filter((f) => f.resolvedAt === null).map((f) => ({ ruleKey: f.ruleKey, ruleTitle: title(f.ruleKey), severity: f.severity, text: f.text }));
}

/** The order's prescriber in the directory (from the feed), or null. */
async function orderPrescriber(db: DbOrTx, practitionerId: string | null) {
	if (!practitionerId) return null;
	const [row] = await db
		.select({ id: prescribers.id, name: prescribers.name, email: prescribers.email, emailProblem: prescribers.emailProblem, userId: prescribers.userId })
		.from(prescribers)
		.where(eq(prescribers.id, practitionerId));
	return row ?? null;
}

export type RecipientChoice = {
	/** the form value: `prescriber:<id>` or `physician:<id>` */
	value: string;
	name: string;
	email: string | null;
	/** the order's own prescriber (by the directory or by their account) */
	isPrescriber: boolean;
	/** why this one cannot be chosen ("no e-mail on record") */
	unavailable: string | null;
	hasAccount: boolean;
};

/**
 * Who a pharmacist may send to: the order's prescriber first (through their account when they have
 * one, else by the directory's e-mail), then every active physician account (a covering doctor).
 */
function recipientChoices(
	physicians: { id: string; displayName: string; email: string }[],
	prescriber: Awaited<ReturnType<typeof orderPrescriber>>,
	prescriberUserId: string | null
): RecipientChoice[] {
	const prescriberAccount = physicians.find((ph) => ph.id === (prescriber?.userId ?? prescriberUserId)) ?? null;
	const choices: RecipientChoice[] = [];
	if (prescriberAccount) {
		choices.push({
			value: `physician:${prescriberAccount.id}`,
			name: prescriberAccount.displayName,
			email: prescriberAccount.email,
			isPrescriber: true,
			unavailable: null,
			hasAccount: true
		});
	} else if (prescriber) {
		choices.push({
			value: `prescriber:${prescriber.id}`,
			name: prescriber.name,
			email: prescriber.email,
			isPrescriber: true,
			unavailable: prescriber.email ? null : `no e-mail on record${prescriber.emailProblem ? ` (${prescriber.emailProblem})` : ''}`,
			hasAccount: false
		});
	}
	for (const ph of physicians) {
		if (ph.id === prescriberAccount?.id) continue;
		choices.push({ value: `physician:${ph.id}`, name: ph.displayName, email: ph.email, isPrescriber: false, unavailable: null, hasAccount: true });
	}
	return choices;
}

/** Everything the compose page pre-fills, or null when there is no such flag. */
export async function composeContext(flagId: string) {
	const db = getDb();
	const ctx = await flagContext(db, flagId);
	if (!ctx) return null;
	const current: CurrentRegimen = {
		agentName: ctx.agent.name,
		doseMg: ctx.order.doseMg,
		intervalH: ctx.order.intervalH,
		infusionH: ctx.order.infusionH,
		route: ctx.order.route
	};
	const p = ctx.assessment.result.dosing?.proposed ?? null;
	const proposed: Regimen | null = p
		? { doseMg: p.doseMg, intervalH: p.intervalH, infusionH: p.infusionH, loadingDoseMg: p.loadingDoseMg, basis: p.basis }
		: null;
	const keyNumbers = keyNumbersFrom(ctx.assessment.result, ctx.assessment.at, ctx.agent.params);
	const [physicians, previous, currentSettings, findings, prescriber] = await Promise.all([
		db
			.select({ id: users.id, displayName: users.displayName, email: users.email })
			.from(users)
			.where(and(eq(users.role, 'physician'), eq(users.active, true)))
			.orderBy(asc(users.displayName)),
		db
			.select({
				id: recommendations.id,
				status: recommendations.status,
				createdAt: recommendations.createdAt,
				physician: sql<string>`coalesce(${recommendations.recipientName}, ${users.displayName})`
			})
			.from(recommendations)
			.leftJoin(users, eq(users.id, recommendations.physicianId))
			.where(eq(recommendations.flagId, flagId))
			.orderBy(desc(recommendations.createdAt)),
		settings.get(db),
		openFindingsOf(db, flagId),
		orderPrescriber(db, ctx.order.practitionerId)
	]);
	const recipients = recipientChoices(physicians, prescriber, ctx.order.prescriberId);
	return {
		flag: ctx.flag,
		patient: { ...ctx.patient, ward: ctx.ward },
		order: { ...ctx.order, agentName: ctx.agent.name },
		assessment: {
			at: ctx.assessment.at,
			complete: ctx.assessment.complete,
			missing: ctx.assessment.result.missing ?? [],
			proposalBasis: p?.basis ?? null,
			proposalReason: ctx.assessment.result.dosing?.proposalReason ?? null,
			cautions: ctx.assessment.result.dosing?.cautions ?? []
		},
		current,
		proposed,
		keyNumbers,
		keyNumberRows: keyNumberRows(keyNumbers),
		findings,
		draft: draftMessage({ findings: findings.length ? findings.map((f) => f.text) : [ctx.flag.finding], current, proposed, keyNumbers }),
		physicians,
		prescriber,
		recipients,
		defaultRecipient: recipients.find((r) => r.isPrescriber && r.email !== null)?.value ?? null,
		previous,
		tokenLifetimeH: currentSettings.tokenLifetimeH
	};
}

export type SendResult = { ok: true; recommendationId: string } | { ok: false; status: 404 | 409 | 422; error: string; field?: string };

class Refused extends Error {
	constructor(readonly result: Extract<SendResult, { ok: false }>) {
		super(result.error);
	}
}

function recommendationEmail(input: {
	link: string;
	expiresAt: Date;
	patient: string;
	findings: RecommendedFinding[];
	current: CurrentRegimen;
	proposed: Regimen;
	keyNumbers: KeyNumbers;
	/** cautions that fit this patient (from the assessment), under the general one */
	cautions: string[];
	message: string;
	pharmacist: { name: string; email: string };
}) {
	const blocks: EmailBlock[] = [
		{
			kind: 'paragraph',
			text: `${input.pharmacist.name}, stewardship pharmacist, suggests a dose change for your patient. Please accept, modify or decline it.`
		},
		{
			kind: 'facts',
			rows: [
				{ label: 'Patient', value: input.patient },
				{ label: 'Current order', value: `${input.current.agentName} ${formatRegimen(input.current)}` }
			]
		},
		{ kind: 'heading', text: input.findings.length === 1 ? 'Finding' : `Findings (${input.findings.length})` },
		{ kind: 'list', items: input.findings.map((f) => `${SEVERITY_TEXT[f.severity]} · ${f.ruleTitle}: ${f.text}`) },
		{ kind: 'heading', text: 'Proposed regimen' },
		{ kind: 'paragraph', text: `${input.current.agentName} ${formatProposed(input.proposed)}` },
		{ kind: 'caution', text: PROPOSAL_CAUTION },
		...input.cautions.map((text): EmailBlock => ({ kind: 'caution', text })),
		{ kind: 'heading', text: 'Key numbers' },
		{ kind: 'facts', rows: keyNumberRows(input.keyNumbers) },
		{ kind: 'quote', by: `Message from ${input.pharmacist.name} (${input.pharmacist.email})`, text: input.message },
		{ kind: 'button', href: input.link, label: 'Answer the recommendation' },
		{
			kind: 'paragraph',
			muted: true,
			text: `The link works once, needs no sign-in and expires on ${formatDateTime(input.expiresAt)}. Anyone holding it can answer, so please do not forward this e-mail. You can also answer after signing in to Ebbline, under My recommendations.`
		}
	];
	return {
		subject: `Dose recommendation for ${input.current.agentName}: please answer`,
		...renderEmail({
			title: `Dose recommendation: ${input.current.agentName}`,
			preheader: `Proposed: ${formatProposed(input.proposed)}`,
			blocks,
			footer:
				'Sent by Ebbline for the antimicrobial stewardship team. Decision support for qualified clinicians; the prescriber remains responsible for the prescription.'
		})
	};
}

type ResolvedRecipient = { physicianId: string | null; prescriberId: string | null; email: string; name: string; isPrescriber: boolean };

/**
 * The chosen recipient, checked: an active physician account, or a prescriber in the directory with an
 * e-mail on record (who needs no account; their linked account, if any, answers in the app too).
 */
async function resolveRecipient(
	tx: DbOrTx,
	input: ComposeInput,
	order: { prescriberId: string | null; practitionerId: string | null }
): Promise<ResolvedRecipient> {
	const chosen = recipientOf(input);
	if (chosen.kind === 'physician') {
		const [physician] = await tx
			.select({ id: users.id, email: users.email, displayName: users.displayName })
			.from(users)
			.where(and(eq(users.id, chosen.id), eq(users.role, 'physician'), eq(users.active, true)));
		if (!physician)
			throw new Refused({
				ok: false,
				status: 422,
				error: 'Choose an active physician or the order’s prescriber.',
				field: input.recipient ? 'recipient' : 'physicianId'
			});
		const prescriberAccount = order.practitionerId ? (await orderPrescriber(tx, order.practitionerId))?.userId : null;
		return {
			physicianId: physician.id,
			prescriberId: null,
			email: physician.email,
			name: physician.displayName,
			isPrescriber: physician.id === (prescriberAccount ?? order.prescriberId)
		};
	}
	const prescriber = await orderPrescriber(tx, chosen.id);
	if (!prescriber) throw new Refused({ ok: false, status: 422, error: 'That prescriber is not in the directory.', field: 'recipient' });
	if (!prescriber.email)
		throw new Refused({ ok: false, status: 422, error: `${prescriber.name} has no e-mail on record; choose a physician with an account.`, field: 'recipient' });
	let physicianId: string | null = null;
	if (prescriber.userId) {
		const [account] = await tx
			.select({ id: users.id })
			.from(users)
			.where(and(eq(users.id, prescriber.userId), eq(users.role, 'physician'), eq(users.active, true)));
		physicianId = account?.id ?? null;
	}
	return { physicianId, prescriberId: prescriber.id, email: prescriber.email, name: prescriber.name, isPrescriber: prescriber.id === order.practitionerId };
}

/**
 * Sends a recommendation in one transaction: the recommendation (its link token stored only as a
 * hash), the outbox row and its mail.send job, the flag moved to `recommended`, and an audit row.
 */
export async function send(flagId: string, input: ComposeInput, who: Who): Promise<SendResult> {
	try {
		return await getDb().transaction(async (tx) => {
			const ctx = await flagContext(tx, flagId);
			if (!ctx) throw new Refused({ ok: false, status: 404, error: 'No flag with that id.' });
			const recipient = await resolveRecipient(tx, input, ctx.order);

			const s = await settings.get(tx);
			const token = randomToken();
			const now = new Date();
			const expiresAt = new Date(now.getTime() + s.tokenLifetimeH * HOUR_MS);
			const current: CurrentRegimen = {
				agentName: ctx.agent.name,
				doseMg: ctx.order.doseMg,
				intervalH: ctx.order.intervalH,
				infusionH: ctx.order.infusionH,
				route: ctx.order.route
			};
			const proposed: Regimen = {
				doseMg: input.doseMg,
				intervalH: input.intervalH,
				infusionH: input.infusionH,
				loadingDoseMg: input.loadingDoseMg,
				basis: ctx.assessment.result.dosing?.proposed?.basis ?? null
			};
			const keyNumbers = keyNumbersFrom(ctx.assessment.result, ctx.assessment.at, ctx.agent.params);
			const open = await openFindingsOf(tx, flagId);
			const findings = open.length ? open : [{ ruleKey: ctx.flag.ruleKey, ruleTitle: ctx.flag.ruleKey, severity: ctx.flag.severity, text: ctx.flag.finding }];
			const [rec] = await tx
				.insert(recommendations)
				.values({
					flagId,
					pharmacistId: who.id,
					physicianId: recipient.physicianId,
					recipientPrescriberId: recipient.prescriberId,
					recipientEmail: recipient.email,
					recipientName: recipient.name,
					recipientChoice: recipient.isPrescriber ? 'prescriber' : 'other',
					message: input.message,
					current,
					proposed,
					keyNumbers,
					findings,
					tokenHash: hashToken(token),
					tokenExpiresAt: expiresAt
				})
				.returning({ id: recommendations.id });

			const acted = await act(flagId, { kind: 'recommend', recommendationId: rec.id }, flagActor(who), { tx, expectedVersion: input.version, now });
			if (!acted.ok) throw new Refused({ ok: false, status: acted.status, error: acted.error });

			const email = recommendationEmail({
				link: `${config.appUrl.replace(/\/$/, '')}/respond/${token}`,
				expiresAt,
				patient: patientLabel({ ...ctx.patient, ward: ctx.ward }, s.emailPatientDetail),
				findings,
				current,
				proposed,
				keyNumbers,
				cautions: ctx.assessment.result.dosing?.cautions ?? [],
				message: input.message,
				pharmacist: { name: who.displayName, email: who.email }
			});
			const outboxId = await mail.queue(tx, { to: recipient.email, ...email, relatedType: 'recommendation', relatedId: rec.id });
			await audit.record(
				{
					actorId: who.id,
					actorLabel: who.email,
					action: 'recommendation.sent',
					objectType: 'recommendation',
					objectId: rec.id,
					after: {
						flagId,
						physicianId: recipient.physicianId,
						prescriberId: recipient.prescriberId,
						to: recipient.email,
						choice: recipient.isPrescriber ? "the order's prescriber" : 'another physician',
						proposed,
						expiresAt: expiresAt.toISOString(),
						outboxId
					},
					requestId: who.requestId
				},
				tx
			);
			return { ok: true as const, recommendationId: rec.id };
		});
	} catch (error) {
		if (error instanceof Refused) return error.result;
		throw error;
	}
}

function flagActor(who: Who, label = who.email): FlagActor {
	return { actorId: who.id, actorLabel: label, role: who.role, requestId: who.requestId };
}

// ---------------------------------------------------------------- reading

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

const TOKEN_SHAPE = /^[A-Za-z0-9_-]{43}$/;

export type TokenLookup =
	| { state: 'invalid' }
	| { state: 'expired' }
	| { state: 'withdrawn' }
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
	| { state: 'open'; recommendation: RecommendationView };

/**
 * What a link's token opens. Unknown (altered), expired and withdrawn links say nothing about the
 * patient; a used link shows only the answer already given.
 */
export async function findByToken(token: string, now = new Date()): Promise<TokenLookup> {
	if (!TOKEN_SHAPE.test(token)) return { state: 'invalid' };
	const [row] = await detailQuery(getDb(), eq(recommendations.tokenHash, hashToken(token)));
	if (!row) return { state: 'invalid' };
	if (row.status === 'withdrawn') return { state: 'withdrawn' };
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
	const s = await settings.get();
	return { state: 'open', recommendation: toView(row, patientLabel({ ...row.patient, ward: row.ward }, s.emailPatientDetail)) };
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

// ---------------------------------------------------------------- answering

export type AnswerResult =
	| { ok: true; status: 'accepted' | 'modified' | 'declined'; flagClosed: boolean }
	| { ok: false; reason: 'invalid' | 'expired' | 'answered' | 'withdrawn' | 'not_yours' };

export type AnswerVia = { via: 'link'; token: string; requestId: string | null } | { via: 'app'; id: string; user: Who };

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
		if (rec.status !== 'sent' || rec.tokenUsedAt) return { ok: false, reason: 'answered' };
		if (target.via === 'link' && rec.tokenExpiresAt <= now) return { ok: false, reason: 'expired' };

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
			`/flags/${rec.flagId}`
		);
		await audit.record(
			{
				actorId: doctor.id,
				actorLabel: label,
				action: `recommendation.${given.outcome}`,
				objectType: 'recommendation',
				objectId: rec.id,
				before: { status: rec.status },
				after: { status: given.outcome, via: target.via, regimen, reason, flagClosed: closed.ok },
				requestId
			},
			tx
		);
		return { ok: true, status: given.outcome, flagClosed: closed.ok };
	});
}

// ---------------------------------------------------------------- reminders

/** Reminders and escalation live with the rest of the loop after sending. */
export { remindDue } from './remind';
