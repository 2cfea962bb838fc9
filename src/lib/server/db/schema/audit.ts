import { bigserial, index, integer, jsonb, pgTable, text, uuid } from 'drizzle-orm/pg-core';
import { createdAt } from './columns';
import { users } from './auth';

/** Append-only: a trigger in the migrations rejects UPDATE and DELETE. */
export const auditLog = pgTable(
	'audit_log',
	{
		id: bigserial({ mode: 'number' }).primaryKey(),
		at: createdAt(),
		actorId: uuid().references(() => users.id),
		actorLabel: text().notNull(), // e-mail, "feed token <name>", "system", "physician link"
		action: text().notNull(), // e.g. "auth.sign_in", "user.role_changed", "flag.claimed"
		objectType: text().notNull(),
		objectId: text(),
		before: jsonb(),
		after: jsonb(),
		requestId: text()
	},
	(t) => [
		index('audit_log_at_idx').on(t.at),
		index('audit_log_actor_idx').on(t.actorId, t.at),
		index('audit_log_object_idx').on(t.objectType, t.objectId),
		// filter by action with newest-first keyset paging, and the loose index scan listing actions
		index('audit_log_action_idx').on(t.action, t.id)
	]
);

/**
 * Who read patient data, apart from the change audit: every view of a patient, a flag or an answer
 * link, and every refusal (403). Append-only like the audit log (trigger in the migration).
 */
export const accessLog = pgTable(
	'access_log',
	{
		id: bigserial({ mode: 'number' }).primaryKey(),
		at: createdAt(),
		actorId: uuid().references(() => users.id),
		/** e-mail, "answer link", "anonymous" */
		actorLabel: text().notNull(),
		role: text(),
		/** what was read: patient, flag, answer_link, patient_api, projection, flag_api; or denied */
		kind: text().notNull(),
		objectId: text(),
		patientId: uuid(),
		route: text().notNull(),
		status: integer().notNull(),
		requestId: text()
	},
	(t) => [index('access_log_at_idx').on(t.at), index('access_log_actor_idx').on(t.actorId, t.at), index('access_log_patient_idx').on(t.patientId, t.at)]
);
