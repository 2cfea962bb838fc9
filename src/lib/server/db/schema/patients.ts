import { sql } from 'drizzle-orm';
import { check, date, doublePrecision, index, pgEnum, pgTable, text, uuid } from 'drizzle-orm/pg-core';
import { SEXES } from '../../../domain/vocabulary';
import { at, createdAt, id, updatedAt } from './columns';
import { feedMessages } from './feed';

export const sexEnum = pgEnum('sex', SEXES);

export const patients = pgTable('patients', {
	id: id(),
	mrn: text().notNull().unique(),
	sourceId: text().unique(), // FHIR Patient.id at the sending system
	givenName: text().notNull(),
	familyName: text().notNull(),
	birthDate: date({ mode: 'string' }).notNull(),
	sex: sexEnum().notNull(),
	createdAt: createdAt(),
	updatedAt: updatedAt()
});

export const encounters = pgTable(
	'encounters',
	{
		id: id(),
		patientId: uuid()
			.notNull()
			.references(() => patients.id, { onDelete: 'cascade' }),
		sourceId: text().unique(),
		ward: text().notNull(),
		bed: text(),
		admittedAt: at().notNull(),
		dischargedAt: at(),
		createdAt: createdAt(),
		updatedAt: updatedAt()
	},
	(t) => [
		index('encounters_patient_idx').on(t.patientId, t.admittedAt),
		index('encounters_ward_idx').on(t.ward),
		check('discharge_after_admission', sql`${t.dischargedAt} IS NULL OR ${t.dischargedAt} >= ${t.admittedAt}`)
	]
);

export const measurementKindEnum = pgEnum('measurement_kind', ['height', 'weight']);

/** Height (cm) and weight (kg) over time, normalised from the unit received. */
export const bodyMeasurements = pgTable(
	'body_measurements',
	{
		id: id(),
		patientId: uuid()
			.notNull()
			.references(() => patients.id, { onDelete: 'cascade' }),
		kind: measurementKindEnum().notNull(),
		value: doublePrecision().notNull(),
		unit: text().notNull(),
		valueNormalised: doublePrecision().notNull(), // cm or kg
		observedAt: at().notNull(),
		sourceId: text().unique(),
		messageId: uuid().references(() => feedMessages.id),
		createdAt: createdAt()
	},
	(t) => [index('body_measurements_patient_idx').on(t.patientId, t.kind, t.observedAt), check('measurement_positive', sql`${t.valueNormalised} > 0`)]
);

export const analyteEnum = pgEnum('analyte', ['creatinine', 'albumin']);

/** Creatinine (normalised to mg/dL) and albumin (normalised to g/L) results. */
export const labResults = pgTable(
	'lab_results',
	{
		id: id(),
		patientId: uuid()
			.notNull()
			.references(() => patients.id, { onDelete: 'cascade' }),
		analyte: analyteEnum().notNull(),
		loinc: text().notNull(),
		value: doublePrecision().notNull(),
		unit: text().notNull(), // UCUM as received
		valueNormalised: doublePrecision().notNull(),
		unitNormalised: text().notNull(), // 'mg/dL' or 'g/L'
		observedAt: at().notNull(),
		sourceId: text().unique(),
		messageId: uuid().references(() => feedMessages.id),
		createdAt: createdAt()
	},
	(t) => [
		index('lab_results_patient_idx').on(t.patientId, t.analyte, t.observedAt),
		index('lab_results_observed_idx').on(t.observedAt),
		check('lab_value_positive', sql`${t.valueNormalised} > 0`)
	]
);
