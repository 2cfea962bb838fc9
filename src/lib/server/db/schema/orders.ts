import { sql } from 'drizzle-orm';
import { boolean, check, doublePrecision, index, jsonb, pgEnum, pgTable, text, uuid } from 'drizzle-orm/pg-core';
import type { Assessment, TraceStep } from '../../../clinical/types';
import type { StoredAssessInput } from '../../../clinical/stored-input';
import { ROUTES } from '../../../domain/vocabulary';
import { at, createdAt, id, updatedAt } from './columns';
import { users } from './auth';
import { agents } from './agents';
import { prescribers } from './prescribers';
import { encounters, patients } from './patients';

export const orderStatusEnum = pgEnum('order_status', ['active', 'stopped']);
export const routeEnum = pgEnum('route', ROUTES);

export const orders = pgTable(
	'orders',
	{
		id: id(),
		patientId: uuid()
			.notNull()
			.references(() => patients.id, { onDelete: 'cascade' }),
		encounterId: uuid().references(() => encounters.id),
		agentId: uuid()
			.notNull()
			.references(() => agents.id),
		sourceId: text().unique(),
		/** the prescriber's Ebbline account, when they have one */
		prescriberId: uuid().references(() => users.id),
		prescriberName: text(),
		/** the prescriber in the directory (from the feed's requester) */
		practitionerId: uuid().references(() => prescribers.id),
		doseMg: doublePrecision().notNull(),
		intervalH: doublePrecision().notNull(),
		infusionH: doublePrecision().notNull().default(0.5),
		route: routeEnum().notNull().default('iv'),
		status: orderStatusEnum().notNull().default('active'),
		startAt: at().notNull(),
		stoppedAt: at(),
		/** a documented restart of therapy after a pause (recorded by a pharmacist): a loading dose may belong again */
		restartedAt: at(),
		createdAt: createdAt(),
		updatedAt: updatedAt()
	},
	(t) => [
		index('orders_patient_idx').on(t.patientId),
		index('orders_active_idx').on(t.status, t.patientId),
		check('order_dose_positive', sql`${t.doseMg} > 0`),
		check('order_interval_positive', sql`${t.intervalH} > 0`),
		check('order_infusion_fits', sql`${t.infusionH} >= 0 AND ${t.infusionH} <= ${t.intervalH}`)
	]
);

/** One re-estimate of an order at a point in time, with the trace of how each number was computed. */
export const assessments = pgTable(
	'assessments',
	{
		id: id(),
		orderId: uuid()
			.notNull()
			.references(() => orders.id, { onDelete: 'cascade' }),
		patientId: uuid()
			.notNull()
			.references(() => patients.id, { onDelete: 'cascade' }),
		at: at().notNull(),
		complete: boolean().notNull(),
		crclMlMin: doublePrecision(),
		halfLifeH: doublePrecision(),
		albuminGL: doublePrecision(),
		result: jsonb().$type<Omit<Assessment, 'trace'>>().notNull(),
		/** the calculation's inputs; the trace is re-run from them when someone opens it */
		input: jsonb().$type<StoredAssessInput>(),
		/** stored traces of assessments made before inputs were kept (new rows leave it empty) */
		trace: jsonb().$type<TraceStep[]>(),
		createdAt: createdAt()
	},
	(t) => [
		index('assessments_order_idx').on(t.orderId, t.at),
		index('assessments_at_idx').on(t.at),
		// a patient's newest assessment (the patient view's header): without it the lookup walks every assessment by time
		index('assessments_patient_idx').on(t.patientId, t.at)
	]
);
