// A pharmacist records that an active order's therapy was restarted after a pause: for one dosing
// interval a loading dose may be proposed again (a loading dose belongs to starting therapy or a
// documented restart, never to an order already running). Audited; the order is re-assessed.
import { and, eq } from 'drizzle-orm';
import * as audit from '../audit';
import { getDb, type DbOrTx } from '../db';
import { orders } from '../db/schema';
import { enqueueReassess } from '../reassess';
import type { Actor } from '../../domain/actor';

/** Records the restart now; false when the order is not an active order of this patient. */
export async function recordRestart(patientId: string, orderId: string, who: Actor, options: { now?: Date; db?: DbOrTx } = {}): Promise<boolean> {
	const now = options.now ?? new Date();
	return (options.db ?? getDb()).transaction(async (tx) => {
		const [row] = await tx
			.update(orders)
			.set({ restartedAt: now })
			.where(and(eq(orders.id, orderId), eq(orders.patientId, patientId), eq(orders.status, 'active')))
			.returning({ id: orders.id });
		if (!row) return false;
		await audit.record({ ...who, action: 'order.restart_recorded', objectType: 'order', objectId: orderId, after: { restartedAt: now.toISOString() } }, tx);
		await enqueueReassess(tx, [orderId]);
		return true;
	});
}
