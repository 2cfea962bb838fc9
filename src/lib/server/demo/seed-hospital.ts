// Seeds the agent library from fixtures/agents.json and the Larkspur Bay demo hospital through the
// feed (source 'seed'), then assesses every active order so the first start has assessments.
import { count, eq, sql } from 'drizzle-orm';
import type { AgentParams } from '../../clinical';
import { getDb, type Database } from '../db';
import { agents, orders, patients } from '../db/schema';
import { takeIncoming } from '../db/upsert';
import { bundleSchema, ingestBundle } from '../feed';
import { reassessOrders } from '../reassess';
import { fixtureAgents, generateHospital } from './hospital';
import { playHistory, type HistoryProgress } from './history';

const NOT_PARAMS = new Set(['atcCode', 'rxnormCode', 'synonyms', 'agentClass', 'provenance']);

/**
 * Adds the example agents. An agent an administrator has edited since (updated_by set) is left as it
 * is; an untouched one follows the fixture, so corrections to the fixture reach existing installs.
 */
export async function seedAgents(db: Database = getDb()): Promise<number> {
	const rows = fixtureAgents().map((a) => {
		const params = Object.fromEntries(Object.entries(a).filter(([k]) => !NOT_PARAMS.has(k))) as AgentParams;
		return {
			code: a.code,
			rxnormCode: a.rxnormCode ?? null,
			name: a.name,
			agentClass: a.agentClass,
			synonyms: a.synonyms ?? [],
			params,
			provenance: a.provenance ?? {}
		};
	});
	const changed = await db
		.insert(agents)
		.values(rows)
		.onConflictDoUpdate({
			target: agents.code,
			set: takeIncoming(agents, ['rxnormCode', 'name', 'agentClass', 'synonyms', 'params', 'provenance']),
			setWhere: sql`${agents.updatedBy} is null and (agents.params, agents.synonyms, agents.name, agents.rxnorm_code, agents.provenance)
				is distinct from (excluded.params, excluded.synonyms, excluded.name, excluded.rxnorm_code, excluded.provenance)`
		})
		.returning({ id: agents.id });
	return changed.length;
}

const SEED_ACTOR = { actorId: null, actorLabel: 'demo seed', requestId: null };

/** Days of history `npm start` plays on first start. */
export const DEMO_HISTORY_DAYS = 90;

/**
 * The demo hospital, once (skipped when any patient exists): `days` days of history played through the
 * feed, the rules and the team's work (history.ts); with `days: 0`, only today's inpatients with their
 * last week of results, assessed once and not yet worked (quick, for benches that need a hospital).
 */
export async function seedHospital(options: { now?: Date; db?: Database; days?: number; onProgress?: (p: HistoryProgress) => void } = {}) {
	const db = options.db ?? getDb();
	const [{ n }] = await db.select({ n: count() }).from(patients);
	if (n > 0) return { skipped: true as const, patients: 0, orders: 0, results: 0, assessed: 0 };
	const now = options.now ?? new Date();
	const days = options.days ?? DEMO_HISTORY_DAYS;
	if (days > 0) {
		const history = await playHistory({ days, now, db, onProgress: options.onProgress });
		return { skipped: false as const, patients: history.stays, orders: history.orders, results: history.results, assessed: history.assessments, history };
	}
	const hospital = generateHospital(now);
	let quarantined = 0;
	for (const message of hospital.bundles) {
		const envelope = bundleSchema.parse(message);
		// the seed assesses every order itself below, so it queues no jobs
		const result = await ingestBundle(JSON.stringify(message), envelope, { source: 'seed', actor: SEED_ACTOR, now, db, enqueue: false });
		quarantined += result.counts.quarantined;
	}
	if (quarantined > 0) throw new Error(`demo seed: ${quarantined} generated entries were quarantined; the generator and the feed disagree`);
	const active = await db.select({ id: orders.id }).from(orders).where(eq(orders.status, 'active'));
	let assessed = 0;
	for (let i = 0; i < active.length; i += 250) {
		assessed += (
			await reassessOrders(
				active.slice(i, i + 250).map((o) => o.id),
				{ db, now }
			)
		).assessed;
	}
	return { skipped: false as const, patients: hospital.patients, orders: hospital.orders, results: hospital.results, assessed };
}
