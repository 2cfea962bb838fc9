// Storing orders and their stops; each changed order is one to re-assess.
import { and, eq, inArray, sql } from 'drizzle-orm';
import { prescribers as directory } from '../prescribers';
import type { Tx } from '../db';
import { encounters, orders, users } from '../db/schema';
import { takeIncoming } from '../db/upsert';
import type { IntakeRecord, OrderRecord, StopRecord } from './types';

import { insertedFlag, latestPerKey, type Hooks } from './store-common';
import { resolveOrderPrescribers, type PrescriberOfEntry } from './store-prescribers';

export async function upsertOrders(
	tx: Tx,
	list: OrderRecord[],
	resolved: Map<IntakeRecord, string>,
	hooks: Hooks & { affectedOrders: Set<string>; now: Date; prescriberOfEntry: PrescriberOfEntry }
) {
	if (list.length === 0) return;
	const recs = latestPerKey(list, (r) => r.sourceId, hooks.setOutcome);
	const encounterIds = [...new Set(recs.map((r) => r.encounterSourceId).filter((s): s is string => !!s))];
	const encounterRows = encounterIds.length
		? await tx.select({ id: encounters.id, sourceId: encounters.sourceId }).from(encounters).where(inArray(encounters.sourceId, encounterIds))
		: [];
	const encounterOf = new Map(encounterRows.map((e) => [e.sourceId as string, e.id]));
	const inDirectory = await resolveOrderPrescribers(tx, recs, hooks.prescriberOfEntry);
	const prescriberOf = await directory.summaries(
		tx,
		[...inDirectory.values()].map((d) => d.practitionerId).filter((id): id is string => id !== null)
	);
	// an order that names its prescriber only by name finds their account by that name
	const wantsAccountByName = recs.some((r) => r.prescriberName && !inDirectory.get(r)?.practitionerId);
	const physicians = wantsAccountByName
		? await tx
				.select({ id: users.id, displayName: users.displayName })
				.from(users)
				.where(and(eq(users.role, 'physician'), eq(users.active, true)))
		: [];
	const byName = new Map(physicians.map((u) => [u.displayName.trim().toLowerCase(), u]));
	const changed = await tx
		.insert(orders)
		.values(
			recs.map((r) => {
				const practitionerId = inDirectory.get(r)?.practitionerId ?? null;
				const listed = practitionerId ? prescriberOf.get(practitionerId) : undefined;
				const account = listed ? null : r.prescriberName ? byName.get(r.prescriberName.toLowerCase()) : undefined;
				return {
					patientId: resolved.get(r) as string,
					encounterId: r.encounterSourceId ? (encounterOf.get(r.encounterSourceId) ?? null) : null,
					agentId: r.agentId,
					sourceId: r.sourceId,
					prescriberId: listed?.userId ?? account?.id ?? null,
					prescriberName: r.prescriberName ?? listed?.name ?? null,
					practitionerId,
					doseMg: r.doseMg,
					intervalH: r.intervalH,
					infusionH: r.infusionH,
					route: r.route,
					status: 'active' as const,
					startAt: r.startAt,
					stoppedAt: null,
					createdAt: hooks.now,
					updatedAt: hooks.now
				};
			})
		)
		.onConflictDoUpdate({
			target: orders.sourceId,
			set: {
				encounterId: sql`coalesce(excluded.encounter_id, orders.encounter_id)`,
				prescriberId: sql`coalesce(excluded.prescriber_id, orders.prescriber_id)`,
				prescriberName: sql`coalesce(excluded.prescriber_name, orders.prescriber_name)`,
				practitionerId: sql`coalesce(excluded.practitioner_id, orders.practitioner_id)`,
				...takeIncoming(orders, ['agentId', 'doseMg', 'intervalH', 'infusionH', 'route', 'status', 'startAt']),
				stoppedAt: sql`null`,
				// the intake's clock (not the transaction's), so a replayed history keeps its order of events
				updatedAt: hooks.now
			},
			setWhere: sql`(orders.agent_id, orders.dose_mg, orders.interval_h, orders.infusion_h, orders.route, orders.status, orders.start_at)
				is distinct from (excluded.agent_id, excluded.dose_mg, excluded.interval_h, excluded.infusion_h, excluded.route, excluded.status, excluded.start_at)
				or (excluded.encounter_id is not null and orders.encounter_id is distinct from excluded.encounter_id)
				or (excluded.practitioner_id is not null and orders.practitioner_id is distinct from excluded.practitioner_id)
				or (excluded.prescriber_id is not null and orders.prescriber_id is distinct from excluded.prescriber_id)
				or (excluded.prescriber_name is not null and orders.prescriber_name is distinct from excluded.prescriber_name)`
		})
		.returning({ id: orders.id, sourceId: orders.sourceId, inserted: insertedFlag });
	const bySource = new Map(changed.map((c) => [c.sourceId as string, c]));
	for (const r of recs) {
		const c = bySource.get(r.sourceId);
		const notes = inDirectory.get(r)?.notes ?? [];
		if (!c) hooks.setOutcome(r, 'duplicate', undefined, notes);
		else {
			hooks.affectedOrders.add(c.id);
			hooks.setOutcome(r, 'accepted', c.inserted ? 'created' : 'updated', notes);
		}
	}
}

export async function applyStops(tx: Tx, list: StopRecord[], hooks: Hooks & { affectedOrders: Set<string>; csv: boolean; now: Date }) {
	if (list.length === 0) return;
	const recs = latestPerKey(list, (r) => r.sourceId, hooks.setOutcome);
	const known = await tx
		.select({ id: orders.id, sourceId: orders.sourceId, status: orders.status })
		.from(orders)
		.where(
			inArray(
				orders.sourceId,
				recs.map((r) => r.sourceId)
			)
		);
	const bySource = new Map(known.map((o) => [o.sourceId as string, o]));
	for (const r of recs) {
		const order = bySource.get(r.sourceId);
		if (!order) {
			const field = hooks.csv ? 'order_id' : 'id';
			const what = hooks.csv ? `order ${r.sourceId}` : `MedicationRequest/${r.sourceId}`;
			hooks.reject(r, field, `${field} ${r.sourceId}: stop for an unknown order (${what} was never received, so there is nothing to stop)`);
			continue;
		}
		if (order.status === 'stopped') {
			hooks.setOutcome(r, 'duplicate');
			continue;
		}
		await tx
			.update(orders)
			.set({ status: 'stopped', stoppedAt: sql`greatest(${orders.startAt}, ${r.stoppedAt.toISOString()}::timestamptz)`, updatedAt: hooks.now })
			.where(eq(orders.id, order.id));
		// the stopped order is assessed once more so that rule evaluation can close its flags
		hooks.affectedOrders.add(order.id);
		hooks.setOutcome(r, 'accepted', 'stopped');
	}
}
