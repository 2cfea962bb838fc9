// Storing doses actually given (tied to their order; an unknown order is quarantined) and measured drug
// levels (tied to patient and agent; stored even before an order of the agent is on record, with a note).
import { and, eq, inArray, ne, sql } from 'drizzle-orm';
import type { Tx } from '../db';
import { agents, drugLevels, medicationAdministrations, orders } from '../db/schema';
import { takeIncoming } from '../db/upsert';
import type { AdministrationRecord, IntakeRecord, LevelRecord } from './types';
import { insertedFlag, latestPerKey, type Hooks } from './store-common';

const HOUR_MS = 3_600_000;

type StoreHooks = Hooks & { affectedOrders: Set<string>; csv: boolean; now: Date };

/**
 * Administrations, idempotent by source id: the same content again is a duplicate, a changed one is
 * updated. Each must name an order on record, of the same patient and agent; an administration sent
 * without an end takes the order's infusion time.
 */
export async function upsertAdministrations(tx: Tx, list: AdministrationRecord[], resolved: Map<IntakeRecord, string>, messageId: string, hooks: StoreHooks) {
	const given = list.filter((r) => !r.markOnly);
	if (given.length > 0) await storeGiven(tx, given, resolved, messageId, hooks);
	const marks = list.filter((r) => r.markOnly);
	if (marks.length > 0) await markInError(tx, marks, hooks);
}

async function storeGiven(tx: Tx, list: AdministrationRecord[], resolved: Map<IntakeRecord, string>, messageId: string, hooks: StoreHooks) {
	const recs = latestPerKey(list, (r) => r.sourceId, hooks.setOutcome);
	const orderIds = [...new Set(recs.map((r) => r.order?.sourceId as string))];
	const known = await tx
		.select({
			id: orders.id,
			sourceId: orders.sourceId,
			patientId: orders.patientId,
			agentId: orders.agentId,
			agentName: agents.name,
			infusionH: orders.infusionH
		})
		.from(orders)
		.innerJoin(agents, eq(agents.id, orders.agentId))
		.where(inArray(orders.sourceId, orderIds));
	const orderOf = new Map(known.map((o) => [o.sourceId as string, o]));
	const rows: (typeof medicationAdministrations.$inferInsert)[] = [];
	const kept: { r: AdministrationRecord; orderId: string }[] = [];
	for (const r of recs) {
		const ref = r.order as NonNullable<AdministrationRecord['order']>;
		const order = orderOf.get(ref.sourceId);
		if (!order) {
			const hint = hooks.csv ? 'upload the order first' : 'send the MedicationRequest first or in the same bundle';
			hooks.reject(r, ref.field, `${ref.field}: unknown order — ${ref.label} was never received, so the dose cannot be tied to an order (${hint})`);
			continue;
		}
		if (order.patientId !== resolved.get(r)) {
			const field = r.patient?.field ?? 'subject';
			hooks.reject(r, field, `${field}: ${r.patient?.label ?? 'the patient'} is not the patient of ${ref.label}`);
			continue;
		}
		if (r.agentId && r.agentId !== order.agentId) {
			const field = hooks.csv ? 'agent' : 'medicationCodeableConcept';
			hooks.reject(r, field, `${field}: the medication given is not the agent of ${ref.label} (${order.agentName})`);
			continue;
		}
		const endAt = r.endAt ?? (order.infusionH > 0 ? new Date(r.startAt.getTime() + order.infusionH * HOUR_MS) : null);
		rows.push({
			patientId: order.patientId,
			orderId: order.id,
			agentId: order.agentId,
			status: r.status,
			startAt: r.startAt,
			endAt,
			doseValue: r.doseValue,
			doseUnit: r.doseUnit,
			doseMg: r.doseMg,
			sourceId: r.sourceId,
			messageId,
			createdAt: hooks.now,
			updatedAt: hooks.now
		});
		kept.push({ r, orderId: order.id });
	}
	if (rows.length === 0) return;
	const changed = await tx
		.insert(medicationAdministrations)
		.values(rows)
		.onConflictDoUpdate({
			target: medicationAdministrations.sourceId,
			set: {
				...takeIncoming(medicationAdministrations, [
					'patientId',
					'orderId',
					'agentId',
					'status',
					'startAt',
					'endAt',
					'doseValue',
					'doseUnit',
					'doseMg',
					'messageId'
				]),
				updatedAt: hooks.now
			},
			setWhere: sql`(medication_administrations.order_id, medication_administrations.status, medication_administrations.start_at,
				medication_administrations.end_at, medication_administrations.dose_value, medication_administrations.dose_unit)
				is distinct from (excluded.order_id, excluded.status, excluded.start_at, excluded.end_at, excluded.dose_value, excluded.dose_unit)`
		})
		.returning({ sourceId: medicationAdministrations.sourceId, inserted: insertedFlag });
	const bySource = new Map(changed.map((c) => [c.sourceId as string, c]));
	for (const { r, orderId } of kept) {
		const c = bySource.get(r.sourceId);
		if (!c) hooks.setOutcome(r, 'duplicate');
		else {
			hooks.affectedOrders.add(orderId);
			hooks.setOutcome(r, 'accepted', c.inserted ? 'created' : 'updated');
		}
	}
}

/** entered-in-error: the stored administration stays on record, marked, and leaves the kinetics. */
async function markInError(tx: Tx, list: AdministrationRecord[], hooks: StoreHooks) {
	const recs = latestPerKey(list, (r) => r.sourceId, hooks.setOutcome);
	const ids = recs.map((r) => r.sourceId);
	const marked = await tx
		.update(medicationAdministrations)
		.set({ status: 'entered-in-error', updatedAt: hooks.now })
		.where(and(inArray(medicationAdministrations.sourceId, ids), ne(medicationAdministrations.status, 'entered-in-error')))
		.returning({ sourceId: medicationAdministrations.sourceId, orderId: medicationAdministrations.orderId });
	const markedOf = new Map(marked.map((m) => [m.sourceId as string, m.orderId]));
	const already = new Set(
		(
			await tx
				.select({ sourceId: medicationAdministrations.sourceId })
				.from(medicationAdministrations)
				.where(and(inArray(medicationAdministrations.sourceId, ids), eq(medicationAdministrations.status, 'entered-in-error')))
		).map((a) => a.sourceId as string)
	);
	for (const r of recs) {
		const orderId = markedOf.get(r.sourceId);
		if (orderId) {
			hooks.affectedOrders.add(orderId);
			hooks.setOutcome(r, 'accepted', 'retracted', ['kept on record, marked entered-in-error and left out of the kinetics']);
		} else if (already.has(r.sourceId)) hooks.setOutcome(r, 'duplicate');
		else {
			const field = hooks.csv ? 'administration_id' : 'id';
			hooks.reject(r, field, `${field} ${r.sourceId}: no stored administration has this id, so there is nothing to mark entered-in-error`);
		}
	}
}

/**
 * Drug levels, idempotent by source id. A level of a patient with no order of its agent on record is
 * stored all the same (an order may follow), and its outcome says so.
 */
export async function upsertLevels(
	tx: Tx,
	list: LevelRecord[],
	resolved: Map<IntakeRecord, string>,
	messageId: string,
	hooks: Hooks & { affectedPatients: Set<string>; now: Date }
) {
	if (list.length === 0) return;
	const recs = latestPerKey(list, (r) => r.sourceId, hooks.setOutcome);
	const changed = await tx
		.insert(drugLevels)
		.values(
			recs.map((r) => ({
				patientId: resolved.get(r) as string,
				agentId: r.agentId,
				loinc: r.loinc,
				timing: r.timing,
				value: r.value,
				unit: r.unit,
				valueMgL: r.valueMgL,
				observedAt: r.observedAt,
				sourceId: r.sourceId,
				messageId,
				createdAt: hooks.now
			}))
		)
		.onConflictDoUpdate({
			target: drugLevels.sourceId,
			set: takeIncoming(drugLevels, ['patientId', 'agentId', 'loinc', 'timing', 'value', 'unit', 'valueMgL', 'observedAt', 'messageId']),
			setWhere: sql`(drug_levels.patient_id, drug_levels.loinc, drug_levels.value, drug_levels.unit, drug_levels.observed_at)
				is distinct from (excluded.patient_id, excluded.loinc, excluded.value, excluded.unit, excluded.observed_at)`
		})
		.returning({ sourceId: drugLevels.sourceId, patientId: drugLevels.patientId, inserted: insertedFlag });
	const bySource = new Map(changed.map((c) => [c.sourceId as string, c]));
	const patientIds = [...new Set(changed.map((c) => c.patientId))];
	const withOrder = patientIds.length
		? await tx.selectDistinct({ patientId: orders.patientId, agentId: orders.agentId }).from(orders).where(inArray(orders.patientId, patientIds))
		: [];
	const hasOrder = new Set(withOrder.map((o) => `${o.patientId}/${o.agentId}`));
	for (const r of recs) {
		const c = bySource.get(r.sourceId);
		if (!c) {
			hooks.setOutcome(r, 'duplicate');
			continue;
		}
		hooks.affectedPatients.add(c.patientId);
		const notes = hasOrder.has(`${c.patientId}/${r.agentId}`)
			? []
			: [`no ${r.agentName} order was found for this patient: the level is stored and is used once an order of ${r.agentName} is on record`];
		hooks.setOutcome(r, 'accepted', c.inserted ? 'created' : 'updated', notes);
	}
}
