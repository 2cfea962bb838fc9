import { sql } from 'drizzle-orm';
import { index, pgTable, text, uniqueIndex, uuid } from 'drizzle-orm/pg-core';
import { at, createdAt, id, updatedAt } from './columns';
import { users } from './auth';

/**
 * The prescriber directory, filled from the feed (FHIR Practitioner and PractitionerRole, CSV order
 * columns). A prescriber needs no Ebbline account: recommendations reach them by e-mail. `email` is
 * null when the feed sent none that is usable; `emailProblem` then says why.
 */
export const prescribers = pgTable(
	'prescribers',
	{
		id: id(),
		name: text().notNull(),
		email: text(),
		emailProblem: text(),
		/** the Ebbline account with the same e-mail, once there is one */
		userId: uuid().references(() => users.id, { onDelete: 'set null' }),
		createdAt: createdAt(),
		updatedAt: updatedAt()
	},
	(t) => [index('prescribers_email_idx').on(sql`lower(${t.email})`)]
);

/** How the hospital's systems identify a prescriber (FHIR Identifier system + value), unique across the directory. */
export const prescriberIdentifiers = pgTable(
	'prescriber_identifiers',
	{
		id: id(),
		prescriberId: uuid()
			.notNull()
			.references(() => prescribers.id, { onDelete: 'cascade' }),
		system: text().notNull(),
		value: text().notNull(),
		createdAt: createdAt()
	},
	(t) => [uniqueIndex('prescriber_identifiers_system_value').on(t.system, t.value), index('prescriber_identifiers_prescriber_idx').on(t.prescriberId)]
);

/** A prescriber's role in the hospital (FHIR PractitionerRole): specialty, organisation, and a role e-mail. */
export const prescriberRoles = pgTable(
	'prescriber_roles',
	{
		id: id(),
		prescriberId: uuid()
			.notNull()
			.references(() => prescribers.id, { onDelete: 'cascade' }),
		/** the PractitionerRole's identifier (system|value), else its resource id */
		sourceKey: text().notNull().unique(),
		role: text(),
		specialty: text(),
		organization: text(),
		email: text(),
		active: text(),
		createdAt: createdAt(),
		updatedAt: updatedAt()
	},
	(t) => [index('prescriber_roles_prescriber_idx').on(t.prescriberId)]
);

/** Single-use links that let a prescriber who answered by e-mail set up an Ebbline account. */
export const accountSetupTokens = pgTable('account_setup_tokens', {
	id: id(),
	prescriberId: uuid().references(() => prescribers.id, { onDelete: 'cascade' }),
	email: text().notNull(),
	tokenHash: text().notNull().unique(),
	expiresAt: at().notNull(),
	usedAt: at(),
	createdAt: createdAt()
});
