import { sql } from 'drizzle-orm';
import { check, doublePrecision, index, pgEnum, pgTable, text, uuid } from 'drizzle-orm/pg-core';
import { LEVEL_TIMINGS } from '../../../clinical/levels-types';
import { ADMINISTRATION_STATUSES } from '../../../domain/vocabulary';
import { at, createdAt, id, updatedAt } from './columns';
import { agents } from './agents';
import { feedMessages } from './feed';
import { orders } from './orders';
import { patients } from './patients';

export const administrationStatusEnum = pgEnum('administration_status', ADMINISTRATION_STATUSES);

/**
 * A dose actually given (a FHIR MedicationAdministration or a CSV row), tied to the order it fulfils.
 * The kinetics of measured levels superpose these; where one is missing, the order's schedule stands in
 * (clinical/dosing-history.ts). One with status not-done records a scheduled dose the ward did not give
 * (held, refused): it adds no drug, and the schedule does not assume that dose. An administration sent
 * again with the same source id replaces the first; one marked entered-in-error stays on record and is
 * left out of every calculation.
 */
export const medicationAdministrations = pgTable(
	'medication_administrations',
	{
		id: id(),
		patientId: uuid()
			.notNull()
			.references(() => patients.id, { onDelete: 'cascade' }),
		orderId: uuid()
			.notNull()
			.references(() => orders.id, { onDelete: 'cascade' }),
		agentId: uuid()
			.notNull()
			.references(() => agents.id),
		status: administrationStatusEnum().notNull().default('completed'),
		startAt: at().notNull(),
		/** end of the infusion; null = a bolus (or an infusion still running) */
		endAt: at(),
		/** the dose as received, and in mg */
		doseValue: doublePrecision().notNull(),
		doseUnit: text().notNull(),
		doseMg: doublePrecision().notNull(),
		sourceId: text().unique(),
		messageId: uuid().references(() => feedMessages.id),
		createdAt: createdAt(),
		updatedAt: updatedAt()
	},
	(t) => [
		index('medication_administrations_order_idx').on(t.orderId, t.startAt),
		index('medication_administrations_patient_idx').on(t.patientId, t.startAt),
		check('administration_dose_positive', sql`${t.doseMg} > 0`),
		check('administration_period', sql`${t.endAt} IS NULL OR ${t.endAt} >= ${t.startAt}`)
	]
);

export const levelTimingEnum = pgEnum('level_timing', LEVEL_TIMINGS);

/**
 * A measured serum or plasma drug concentration (vancomycin, gentamicin, tobramycin, amikacin) from a
 * LOINC-coded Observation or a CSV row, normalised to mg/L. Tied to the patient and the agent, not to an
 * order: the assessment takes the levels of the order's agent drawn while the order ran.
 */
export const drugLevels = pgTable(
	'drug_levels',
	{
		id: id(),
		patientId: uuid()
			.notNull()
			.references(() => patients.id, { onDelete: 'cascade' }),
		agentId: uuid()
			.notNull()
			.references(() => agents.id),
		loinc: text().notNull(),
		timing: levelTimingEnum().notNull(),
		value: doublePrecision().notNull(),
		/** UCUM as received */
		unit: text().notNull(),
		valueMgL: doublePrecision().notNull(),
		observedAt: at().notNull(),
		sourceId: text().unique(),
		messageId: uuid().references(() => feedMessages.id),
		createdAt: createdAt()
	},
	(t) => [
		index('drug_levels_patient_idx').on(t.patientId, t.agentId, t.observedAt),
		index('drug_levels_observed_idx').on(t.observedAt),
		check('drug_level_value_not_negative', sql`${t.valueMgL} >= 0`)
	]
);
