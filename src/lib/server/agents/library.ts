// The agent library: list and edit. Every edit is audited (before and after) and followed, in the same
// transaction, by a rules replay of the agent's active orders and their re-assessment with the new values.
import { eq, sql } from 'drizzle-orm';
import type { AgentParams, DoseBand } from '../../clinical/types';
import type { AgentForm } from '../../validation/agents';
import * as audit from '../audit';
import { getDb } from '../db';
import { agents, users } from '../db/schema';
import { enqueueReassess } from '../reassess';
import { requestReplay } from '../rules';
import type { Actor } from '../../domain/actor';

export type AgentListItem = {
	id: string;
	code: string;
	name: string;
	agentClass: string;
	synonyms: string[];
	params: AgentParams;
	provenance: Record<string, string>;
	active: boolean;
	updatedAt: Date;
	updatedBy: string | null;
	activeOrders: number;
};

export async function list(): Promise<AgentListItem[]> {
	const db = getDb();
	const rows = await db
		.select({
			id: agents.id,
			code: agents.code,
			name: agents.name,
			agentClass: agents.agentClass,
			synonyms: agents.synonyms,
			params: agents.params,
			provenance: agents.provenance,
			active: agents.active,
			updatedAt: agents.updatedAt,
			updatedBy: users.displayName,
			activeOrders: sql<number>`(select count(*)::int from orders o where o.agent_id = ${agents.id} and o.status = 'active')`
		})
		.from(agents)
		.leftJoin(users, eq(users.id, agents.updatedBy))
		.orderBy(agents.name);
	return rows;
}

export class AgentNotFoundError extends Error {}

/** The AgentParams fields the editor owns; anything else stored with the agent is kept as it is. */
function paramsFrom(form: AgentForm, current: AgentParams): AgentParams {
	const bands: DoseBand[] = form.bands.map((b) => ({
		minCrclMlMin: b.minCrclMlMin,
		maxCrclMlMin: b.maxCrclMlMin,
		doseMg: b.doseMg,
		doseMgPerKg: b.doseMgPerKg,
		intervalH: b.intervalH,
		note: b.note,
		...(b.avoid ? { avoid: true } : {}),
		...(b.aucGuided ? { aucGuided: true } : {})
	}));
	// the oral bioavailability field is the oral route's; a route the library declared keeps its other settings
	const routes = current.routes?.po
		? {
				...current.routes,
				po: { ...current.routes.po, bioavailability: form.bioavailability, systemic: form.bioavailability > 0 && current.routes.po.systemic }
			}
		: current.routes;
	return {
		...current,
		fe: form.fe,
		proteinBinding: form.proteinBinding,
		albuminRefGL: form.albuminRefGL,
		vdLPerKg: form.vdLPerKg,
		vdWeightBasis: form.vdWeightBasis,
		halfLifeNormalH: form.halfLifeNormalH,
		model: form.model,
		usualDoseMg: form.usualDoseMg,
		usualDoseMgPerKg: form.usualDoseMgPerKg,
		usualIntervalH: form.usualIntervalH,
		usualInfusionH: form.usualInfusionH,
		adjustBy: form.adjustBy,
		troughMaxMgL: form.troughMaxMgL,
		aucTargetMgHL: form.aucLowMgHL !== null && form.aucHighMgHL !== null ? [form.aucLowMgHL, form.aucHighMgHL] : null,
		loadingTargetMgL: form.loadingTargetMgL,
		nephrotoxic: form.nephrotoxic,
		renallyAdjusted: form.renallyAdjusted,
		maxCreatinineAgeH: form.maxCreatinineAgeH,
		bioavailability: form.bioavailability,
		routes,
		renalBands: bands
	};
}

/** JSON with object keys sorted: jsonb stores keys in its own order, so plain JSON.stringify would differ. */
function canonical(value: unknown): string {
	if (Array.isArray(value)) return `[${value.map(canonical).join(',')}]`;
	if (value && typeof value === 'object') {
		const entries = Object.entries(value as Record<string, unknown>).filter(([, v]) => v !== undefined);
		return `{${entries
			.sort(([a], [b]) => (a < b ? -1 : a > b ? 1 : 0))
			.map(([k, v]) => `${JSON.stringify(k)}:${canonical(v)}`)
			.join(',')}}`;
	}
	return JSON.stringify(value ?? null);
}

/** Field names whose values differ (renal bands compared as a whole). */
function changedFields(before: AgentParams, after: AgentParams): string[] {
	const keys = new Set([...Object.keys(before), ...Object.keys(after)]) as Set<keyof AgentParams>;
	return [...keys].filter((k) => canonical(before[k]) !== canonical(after[k]));
}

/**
 * Saves an edited agent. Edited values are tagged "local" in the provenance (the institution's own
 * value, no longer the example one). Returns the fields that changed; nothing is written when none did.
 */
export async function update(form: AgentForm, who: Actor) {
	return getDb().transaction(async (tx) => {
		const [current] = await tx.select().from(agents).where(eq(agents.id, form.id)).for('update');
		if (!current) throw new AgentNotFoundError('That agent no longer exists.');
		const params = paramsFrom(form, current.params);
		const changed = changedFields(current.params, params);
		const activeChanged = current.active !== form.active;
		if (changed.length === 0 && !activeChanged) return { changed: [] as string[], replayOrders: 0 };
		const provenance = { ...current.provenance };
		for (const field of changed) provenance[field] = 'local';
		await tx.update(agents).set({ params, provenance, active: form.active, updatedBy: who.actorId }).where(eq(agents.id, form.id));
		const before = Object.fromEntries(changed.map((k) => [k, current.params[k as keyof AgentParams]]));
		const after = Object.fromEntries(changed.map((k) => [k, params[k as keyof AgentParams]]));
		if (activeChanged) {
			before.active = current.active;
			after.active = form.active;
		}
		await audit.record(
			{
				...who,
				action: 'agent.updated',
				objectType: 'agent',
				objectId: form.id,
				before: { code: current.code, ...before },
				after: { code: current.code, ...after }
			},
			tx
		);
		const orderIds = Array.from(
			(await tx.execute(sql`select id from orders where agent_id = ${form.id}::uuid and status = 'active'`)) as Iterable<{ id: string }>
		).map((r) => r.id);
		// the rules see the new agent-level values at once; the re-assessments then recompute kinetics and bands
		await requestReplay(tx, { reason: 'agent', agentId: form.id });
		await enqueueReassess(tx, orderIds);
		return { changed: activeChanged ? [...changed, 'active'] : changed, replayOrders: orderIds.length };
	});
}
