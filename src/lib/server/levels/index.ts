// What the record holds of an order's doses actually given and of its agent's measured levels, in the
// shape the measured-level kinetics take (clinical/levels.ts). The reassessment, the projection panel and
// the patient view read them through here.
import { and, asc, gte, inArray, lte, ne } from 'drizzle-orm';
import type { Administration, DrugLevel } from '../../clinical';
import { getDb, type DbOrTx } from '../db';
import { drugLevels, medicationAdministrations } from '../db/schema';

/**
 * Levels drawn this long before the order's start still belong to it (a level drawn before the first dose
 * is then marked, with the reason, by the fit rather than silently left out); levels of an earlier course
 * of the same agent, further back, do not.
 */
export const LEVELS_BEFORE_START_H = 12;

export type OrderRef = { id: string; patientId: string; agentId: string; startAt: Date; stoppedAt: Date | null };
export type MeasuredDosing = { administrations: Administration[]; levels: DrugLevel[] };

/** The order's administrations (not entered in error; those not given marked) and the levels of its agent drawn while it ran, up to `at`. */
export async function measuredDosing(order: OrderRef, at: Date, db: DbOrTx = getDb()): Promise<MeasuredDosing> {
	return (await measuredDosingMany([{ ...order, at }], db)).get(order.id) as MeasuredDosing;
}

/** Whether each of these orders has at least one measured level (the reassessment skips the fit for the rest). */
export async function ordersWithLevels(orders: readonly OrderRef[], db: DbOrTx = getDb()): Promise<Set<string>> {
	if (orders.length === 0) return new Set();
	const patientIds = [...new Set(orders.map((o) => o.patientId))];
	const rows = await db
		.selectDistinct({ patientId: drugLevels.patientId, agentId: drugLevels.agentId })
		.from(drugLevels)
		.where(inArray(drugLevels.patientId, patientIds));
	const has = new Set(rows.map((r) => `${r.patientId}/${r.agentId}`));
	return new Set(orders.filter((o) => has.has(`${o.patientId}/${o.agentId}`)).map((o) => o.id));
}

/**
 * measuredDosing() for a batch of orders in two queries whatever its size: each order's administrations
 * and its agent's levels, as of that order's own assessment time. Orders missing from the result had none.
 */
export async function measuredDosingMany(orders: readonly (OrderRef & { at: Date })[], db: DbOrTx = getDb()): Promise<Map<string, MeasuredDosing>> {
	const out = new Map<string, MeasuredDosing>();
	if (orders.length === 0) return out;
	for (const o of orders) out.set(o.id, { administrations: [], levels: [] });
	const latest = new Date(Math.max(...orders.map((o) => o.at.getTime())));
	const earliest = new Date(Math.min(...orders.map((o) => o.startAt.getTime())) - LEVELS_BEFORE_START_H * 3_600_000);
	const [given, drawn] = await Promise.all([
		db
			.select({
				orderId: medicationAdministrations.orderId,
				id: medicationAdministrations.id,
				startAt: medicationAdministrations.startAt,
				endAt: medicationAdministrations.endAt,
				doseMg: medicationAdministrations.doseMg,
				status: medicationAdministrations.status
			})
			.from(medicationAdministrations)
			.where(
				and(
					inArray(
						medicationAdministrations.orderId,
						orders.map((o) => o.id)
					),
					ne(medicationAdministrations.status, 'entered-in-error'),
					lte(medicationAdministrations.startAt, latest)
				)
			)
			.orderBy(asc(medicationAdministrations.startAt)),
		db
			.select({
				patientId: drugLevels.patientId,
				agentId: drugLevels.agentId,
				id: drugLevels.id,
				at: drugLevels.observedAt,
				mgL: drugLevels.valueMgL,
				timing: drugLevels.timing
			})
			.from(drugLevels)
			.where(
				and(
					inArray(drugLevels.patientId, [...new Set(orders.map((o) => o.patientId))]),
					inArray(drugLevels.agentId, [...new Set(orders.map((o) => o.agentId))]),
					gte(drugLevels.observedAt, earliest),
					lte(drugLevels.observedAt, latest)
				)
			)
			.orderBy(asc(drugLevels.observedAt))
	]);
	const byId = new Map(orders.map((o) => [o.id, o]));
	for (const { orderId, status, ...a } of given) {
		const o = byId.get(orderId);
		if (o && a.startAt <= o.at) out.get(orderId)?.administrations.push(status === 'not-done' ? { ...a, notGiven: true } : a);
	}
	for (const { patientId, agentId, ...l } of drawn) {
		for (const o of orders) {
			if (o.patientId !== patientId || o.agentId !== agentId) continue;
			if (l.at.getTime() < o.startAt.getTime() - LEVELS_BEFORE_START_H * 3_600_000 || l.at > o.at) continue;
			out.get(o.id)?.levels.push(l);
		}
	}
	return out;
}
