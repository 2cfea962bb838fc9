import { sql } from 'drizzle-orm';
import { check, index, pgEnum, pgTable, text, uuid } from 'drizzle-orm/pg-core';
import { RENAL_REPLACEMENT_MODES } from '../../../clinical/types';
import { at, createdAt, id } from './columns';
import { users } from './auth';
import { feedMessages } from './feed';
import { patients } from './patients';

export const renalReplacementModeEnum = pgEnum('renal_replacement_mode', RENAL_REPLACEMENT_MODES);
/**
 * session: a dialysis Procedure from the feed; condition: CKD stage 5 on dialysis from the feed;
 * set / clear: a pharmacist's statement on the patient page (the latest word at its time).
 */
export const renalReplacementKindEnum = pgEnum('renal_replacement_kind', ['session', 'condition', 'set', 'clear']);

/** What the record says about dialysis and CRRT; the periods in force are derived from it (clinical/renal-replacement-timeline.ts). */
export const renalReplacementEvents = pgTable(
	'renal_replacement_events',
	{
		id: id(),
		patientId: uuid()
			.notNull()
			.references(() => patients.id, { onDelete: 'cascade' }),
		kind: renalReplacementKindEnum().notNull(),
		/** null only for a pharmacist's clear */
		mode: renalReplacementModeEnum(),
		fromAt: at().notNull(),
		/** end of a session or of a resolved condition; null while it continues */
		toAt: at(),
		sourceId: text().unique(),
		messageId: uuid().references(() => feedMessages.id),
		setBy: uuid().references(() => users.id),
		reason: text(),
		createdAt: createdAt()
	},
	(t) => [
		index('renal_replacement_events_patient_idx').on(t.patientId, t.fromAt),
		check('renal_replacement_mode_given', sql`${t.kind} = 'clear' OR ${t.mode} IS NOT NULL`),
		check('renal_replacement_period', sql`${t.toAt} IS NULL OR ${t.toAt} >= ${t.fromAt}`)
	]
);
