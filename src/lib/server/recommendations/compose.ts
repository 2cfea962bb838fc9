// Composing a recommendation from a flag's assessment and sending it to the prescriber (or a covering
// physician) by e-mail through the outbox, in one transaction with the flag's move to `recommended`.
import { and, asc, desc, eq, sql } from 'drizzle-orm';
import type { AgentParams, Assessment } from '../../clinical/types';
import {
	draftMessage,
	keyNumberRows,
	patientLabel,
	type CurrentRegimen,
	type KeyNumbers,
	type RecommendedFinding,
	type Regimen
} from '../../recommendations/format';
import { recipientOf, type ComposeInput } from '../../validation/recommendations';
import * as audit from '../audit';
import { hashToken, randomToken } from '../auth';
import { config } from '../config';
import { getDb, type DbOrTx } from '../db';
import { agents, assessments, flags, orders, patients, prescribers, recommendations, users } from '../db/schema';
import { act, type FlagActor, listFindings } from '../flags';
import * as mail from '../mail';
import { ruleTitles } from '../rules';
import * as settings from '../settings';
import { recommendationEmail } from './emails';
import { wardOf } from './queries';
import type { ActingUser as Who } from '../../domain/actor';

const HOUR_MS = 3_600_000;

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

/** The order as it stands, as a recommendation shows it. */
function currentRegimen(ctx: NonNullable<Awaited<ReturnType<typeof flagContext>>>): CurrentRegimen {
	return { agentName: ctx.agent.name, doseMg: ctx.order.doseMg, intervalH: ctx.order.intervalH, infusionH: ctx.order.infusionH, route: ctx.order.route };
}

/** Everything the compose page pre-fills, or null when there is no such flag. */
export async function composeContext(flagId: string) {
	const db = getDb();
	const ctx = await flagContext(db, flagId);
	if (!ctx) return null;
	const current = currentRegimen(ctx);
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
	// one read of the directory: the chosen prescriber, or the order's (whose account says whether a chosen physician prescribed)
	const prescriber = await orderPrescriber(tx, chosen.kind === 'prescriber' ? chosen.id : order.practitionerId);
	if (chosen.kind === 'physician') {
		const physician = await activePhysician(tx, chosen.id);
		if (!physician)
			throw new Refused({
				ok: false,
				status: 422,
				error: 'Choose an active physician or the order’s prescriber.',
				field: input.recipient ? 'recipient' : 'physicianId'
			});
		return {
			physicianId: physician.id,
			prescriberId: null,
			email: physician.email,
			name: physician.displayName,
			isPrescriber: physician.id === (prescriber?.userId ?? order.prescriberId)
		};
	}
	if (!prescriber) throw new Refused({ ok: false, status: 422, error: 'That prescriber is not in the directory.', field: 'recipient' });
	if (!prescriber.email)
		throw new Refused({ ok: false, status: 422, error: `${prescriber.name} has no e-mail on record; choose a physician with an account.`, field: 'recipient' });
	const account = prescriber.userId ? await activePhysician(tx, prescriber.userId) : null;
	return {
		physicianId: account?.id ?? null,
		prescriberId: prescriber.id,
		email: prescriber.email,
		name: prescriber.name,
		isPrescriber: prescriber.id === order.practitionerId
	};
}

/** An active physician account by id, or null. */
async function activePhysician(tx: DbOrTx, id: string) {
	const [row] = await tx
		.select({ id: users.id, email: users.email, displayName: users.displayName })
		.from(users)
		.where(and(eq(users.id, id), eq(users.role, 'physician'), eq(users.active, true)));
	return row ?? null;
}

/**
 * Sends a recommendation in one transaction: the recommendation (its link token stored only as a
 * hash), the outbox row and its mail.send job, the flag moved to `recommended`, and an audit row.
 */
/** `options.now`: the time of sending (a replayed history passes its own; otherwise the clock). */
export async function send(flagId: string, input: ComposeInput, who: Who, options: { now?: Date } = {}): Promise<SendResult> {
	try {
		return await getDb().transaction(async (tx) => {
			const ctx = await flagContext(tx, flagId);
			if (!ctx) throw new Refused({ ok: false, status: 404, error: 'No flag with that id.' });
			const recipient = await resolveRecipient(tx, input, ctx.order);

			const s = await settings.get(tx);
			const token = randomToken();
			const now = options.now ?? new Date();
			const expiresAt = new Date(now.getTime() + s.tokenLifetimeH * HOUR_MS);
			const current = currentRegimen(ctx);
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
					tokenExpiresAt: expiresAt,
					createdAt: now,
					updatedAt: now
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
			const outboxId = await mail.queue(tx, { to: recipient.email, ...email, relatedType: 'recommendation', relatedId: rec.id, at: now });
			await audit.record(
				{
					at: now,
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
