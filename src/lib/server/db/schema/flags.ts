import { sql } from 'drizzle-orm';
import { bigserial, boolean, check, doublePrecision, index, integer, jsonb, pgEnum, pgTable, text, uniqueIndex, uuid } from 'drizzle-orm/pg-core';
import { FLAG_STATES, OUTCOMES, RECOMMENDATION_STATUSES, SEVERITIES, type FlagState, type Outcome, type Severity } from '../../../domain/vocabulary';
import { at, createdAt, id, updatedAt } from './columns';
import { users } from './auth';
import { assessments, orders } from './orders';
import { patients } from './patients';
import { ruleVersions } from './rules';
import { prescribers } from './prescribers';

export const flagStateEnum = pgEnum('flag_state', FLAG_STATES);
export const outcomeEnum = pgEnum('outcome', OUTCOMES);
export const severityEnum = pgEnum('severity', SEVERITIES);

export type { FlagState, Outcome, Severity };

/**
 * The triage board's unit of work: at most one open flag per order, holding that order's findings
 * (flag_findings). The headline columns (rule_key, severity, priority, finding, suggested_action) are
 * those of its worst open finding, kept here so the board reads one row per flag.
 */
export const flags = pgTable(
	'flags',
	{
		id: id(),
		orderId: uuid()
			.notNull()
			.references(() => orders.id, { onDelete: 'cascade' }),
		patientId: uuid()
			.notNull()
			.references(() => patients.id, { onDelete: 'cascade' }),
		/** rule of the worst open finding (the headline) */
		ruleKey: text().notNull(),
		ruleVersionId: uuid()
			.notNull()
			.references(() => ruleVersions.id),
		/** the newest assessment that decided this flag's findings */
		assessmentId: uuid()
			.notNull()
			.references(() => assessments.id),
		state: flagStateEnum().notNull().default('new'),
		outcome: outcomeEnum(),
		severity: severityEnum().notNull(),
		priority: doublePrecision().notNull(),
		finding: text().notNull(),
		suggestedAction: text(),
		facts: jsonb().notNull(),
		assignedTo: uuid().references(() => users.id),
		snoozedUntil: at(),
		snoozeUntilNextResult: boolean().notNull().default(false),
		/** bumped on every change; clients send it back for optimistic concurrency */
		version: integer().notNull().default(1),
		openedAt: createdAt(),
		updatedAt: updatedAt(),
		firstActionAt: at(),
		closedAt: at(),
		/** when a finding that joined last raised the flag's severity (the board marks it for a day) */
		escalatedAt: at()
	},
	(t) => [
		// one open flag per order: concurrent workers cannot open a second one
		uniqueIndex('flags_one_open_per_order')
			.on(t.orderId)
			.where(sql`${t.state} <> 'closed'`),
		// the board's default page (open flags by priority, either direction, read backwards for desc)
		index('flags_open_priority_idx')
			.on(t.priority, t.id)
			.where(sql`${t.state} <> 'closed'`),
		index('flags_patient_idx').on(t.patientId),
		index('flags_opened_idx').on(t.openedAt),
		check('closed_has_outcome', sql`(${t.state} = 'closed') = (${t.outcome} IS NOT NULL)`)
	]
);

/**
 * One rule holding for an order: raised at one assessment, refreshed while it holds, resolved (with the
 * assessment that resolved it) when it no longer does. Findings of a flag a person closed stay
 * unresolved: they held when the flag was closed.
 */
export const flagFindings = pgTable(
	'flag_findings',
	{
		id: id(),
		flagId: uuid()
			.notNull()
			.references(() => flags.id, { onDelete: 'cascade' }),
		ruleKey: text().notNull(),
		ruleVersionId: uuid()
			.notNull()
			.references(() => ruleVersions.id),
		severity: severityEnum().notNull(),
		priority: doublePrecision().notNull(),
		text: text().notNull(),
		suggestedAction: text(),
		/** the newest assessment at which the rule held */
		assessmentId: uuid()
			.notNull()
			.references(() => assessments.id),
		raisedAssessmentId: uuid()
			.notNull()
			.references(() => assessments.id),
		raisedAt: createdAt(),
		updatedAt: updatedAt(),
		resolvedAt: at(),
		resolvedAssessmentId: uuid().references(() => assessments.id),
		resolvedReason: text()
	},
	(t) => [
		uniqueIndex('flag_findings_one_open_per_rule')
			.on(t.flagId, t.ruleKey)
			.where(sql`${t.resolvedAt} IS NULL`),
		index('flag_findings_flag_idx').on(t.flagId),
		// findings per rule over a period (reports) and the board's rule filter
		index('flag_findings_rule_idx').on(t.ruleKey, t.raisedAt)
	]
);

export const flagEvents = pgTable(
	'flag_events',
	{
		id: bigserial({ mode: 'number' }).primaryKey(),
		flagId: uuid()
			.notNull()
			.references(() => flags.id, { onDelete: 'cascade' }),
		actorId: uuid().references(() => users.id),
		kind: text().notNull(), // opened, finding_joined, finding_resolved, refreshed, merged, claimed, released, review_started, snoozed, woke, note, recommended, closed
		fromState: flagStateEnum(),
		toState: flagStateEnum(),
		note: text(),
		data: jsonb(),
		at: createdAt()
	},
	(t) => [index('flag_events_flag_idx').on(t.flagId, t.at)]
);

export const recommendationStatusEnum = pgEnum('recommendation_status', RECOMMENDATION_STATUSES);

export const recommendations = pgTable(
	'recommendations',
	{
		id: id(),
		flagId: uuid()
			.notNull()
			.references(() => flags.id, { onDelete: 'cascade' }),
		pharmacistId: uuid()
			.notNull()
			.references(() => users.id),
		/** the answering physician's account; null for a prescriber without one (reached by e-mail) */
		physicianId: uuid().references(() => users.id),
		/** the prescriber in the directory the recommendation went to, when it went to one */
		recipientPrescriberId: uuid().references(() => prescribers.id),
		/** where it was sent and to whom (always set when Ebbline sends; a physician account stands in when absent) */
		recipientEmail: text(),
		recipientName: text(),
		/** 'prescriber' when sent to the order's own prescriber, 'other' when the pharmacist chose someone else */
		recipientChoice: text().notNull().default('other'),
		status: recommendationStatusEnum().notNull().default('sent'),
		message: text().notNull(),
		current: jsonb().notNull(), // regimen at the time of sending
		proposed: jsonb().notNull(), // regimen proposed by the pharmacist
		keyNumbers: jsonb().notNull(),
		/** the flag's findings when it was sent: [{ ruleKey, ruleTitle, severity, text }] */
		findings: jsonb().notNull().default([]),
		tokenHash: text().notNull().unique(),
		tokenExpiresAt: at().notNull(),
		tokenUsedAt: at(),
		/** the link stopped working before its expiry: the physician's account was deactivated */
		tokenRevokedAt: at(),
		responseRegimen: jsonb(),
		responseReason: text(),
		respondedAt: at(),
		respondedVia: text(), // 'link' | 'app'
		remindedAt: at(),
		reminderCount: integer().notNull().default(0),
		/** when the sender was told that reminders went unanswered */
		escalatedAt: at(),
		withdrawnAt: at(),
		/** null: withdrawn by Ebbline (order stopped or changed, patient discharged) */
		withdrawnBy: uuid().references(() => users.id),
		withdrawnReason: text(),
		createdAt: createdAt(),
		updatedAt: updatedAt()
	},
	(t) => [
		index('recommendations_physician_idx').on(t.physicianId, t.status),
		index('recommendations_flag_idx').on(t.flagId),
		index('recommendations_created_idx').on(t.createdAt),
		index('recommendations_recipient_email_idx').on(sql`lower(${t.recipientEmail})`),
		check('recommendation_has_recipient', sql`${t.physicianId} IS NOT NULL OR ${t.recipientEmail} IS NOT NULL`)
	]
);

/**
 * The second step of an answer link: a 6-digit code e-mailed to the address the recommendation went to
 * (stored hashed, valid 10 minutes, 5 attempts, single use). A correct code grants a short confirmation
 * (its hash kept here too) that the holder's browser presents as a cookie bound to this recommendation.
 */
export const answerLinkCodes = pgTable(
	'answer_link_codes',
	{
		id: id(),
		recommendationId: uuid()
			.notNull()
			.references(() => recommendations.id, { onDelete: 'cascade' }),
		codeHash: text(),
		codeExpiresAt: at().notNull(),
		attempts: integer().notNull().default(0),
		usedAt: at(),
		confirmationHash: text().unique(),
		confirmedUntil: at(),
		createdAt: createdAt()
	},
	(t) => [index('answer_link_codes_recommendation_idx').on(t.recommendationId, t.createdAt)]
);

export const notifications = pgTable(
	'notifications',
	{
		id: id(),
		userId: uuid()
			.notNull()
			.references(() => users.id, { onDelete: 'cascade' }),
		text: text().notNull(),
		link: text(),
		createdAt: createdAt(),
		readAt: at()
	},
	(t) => [index('notifications_user_idx').on(t.userId, t.readAt)]
);
