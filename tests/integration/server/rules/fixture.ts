// A small invented hospital for the rules-and-flags tests, built straight through the schema: agents
// from the fixture library, patients, orders, and assessments computed by the clinical core.
import { randomUUID } from 'node:crypto';
import { eq, sql } from 'drizzle-orm';
import { assess } from '../../../../src/lib/clinical/assess';
import type { AgentParams, Assessment } from '../../../../src/lib/clinical/types';
import { getDb } from '../../../../src/lib/server/db';
import { agents, assessments, orders, patients, users } from '../../../../src/lib/server/db/schema';
import { evaluateAssessments, type StoredAssessment } from '../../../../src/lib/server/flags';
import agentsFixture from '../../../../fixtures/agents.json';

type FixtureAgent = AgentParams & { agentClass: string; rxnormCode: string | null; synonyms: string[]; provenance: Record<string, string> };
const library = (agentsFixture as unknown as { agents: FixtureAgent[] }).agents;
export const HOUR_MS = 3_600_000;

/** Runs the rules over stored assessments in one transaction, as the order.reassess job does. */
export const evaluate = (stored: StoredAssessment[]) => getDb().transaction((tx) => evaluateAssessments(tx, stored));
export const DAY_MS = 86_400_000;

export type AgentRow = { id: string; code: string; name: string; agentClass: string; params: AgentParams };

export async function ensureAgent(name: string): Promise<AgentRow> {
	const a = library.find((x) => x.name === name);
	if (!a) throw new Error(`no fixture agent ${name}`);
	const db = getDb();
	const [existing] = await db.select().from(agents).where(eq(agents.code, a.code));
	if (existing) return { id: existing.id, code: existing.code, name: existing.name, agentClass: existing.agentClass, params: existing.params };
	const { provenance, synonyms, rxnormCode, agentClass, ...params } = a;
	const [row] = await db
		.insert(agents)
		.values({ code: a.code, name: a.name, agentClass, rxnormCode, synonyms, params: params as AgentParams, provenance: provenance as Record<string, string> })
		.returning();
	return { id: row.id, code: row.code, name: row.name, agentClass: row.agentClass, params: row.params };
}

export async function makeUser(role: 'admin' | 'pharmacist' | 'physician', name = `${role}-${randomUUID().slice(0, 8)}`) {
	const [row] = await getDb()
		.insert(users)
		.values({ email: `${name}@larkspur.test`, displayName: name, role, passwordHash: 'not-a-real-hash' })
		.returning({ id: users.id, email: users.email });
	return { actorId: row.id, actorLabel: row.email, requestId: null };
}

/** A 40-year-old man, 175 cm, 70 kg (below IBW 70.5 kg): Cockcroft–Gault CrCl = 97.2 / SCr mL/min. */
export type Patient = { id: string; ageYears: number; heightCm: number; weightKg: number; sex: 'male' | 'female' };

export async function makePatient(): Promise<Patient> {
	const [row] = await getDb()
		.insert(patients)
		.values({ mrn: `T${randomUUID().slice(0, 10)}`, givenName: 'Test', familyName: 'Patient', birthDate: '1986-01-01', sex: 'male' })
		.returning({ id: patients.id });
	return { id: row.id, ageYears: 40, heightCm: 175, weightKg: 70, sex: 'male' };
}

export type Order = { id: string; patientId: string; agent: AgentRow; doseMg: number; intervalH: number; infusionH: number; startAt: Date };

export async function makeOrder(
	patient: Patient,
	agent: AgentRow,
	regimen: { doseMg: number; intervalH: number; infusionH?: number },
	startAt: Date
): Promise<Order> {
	const infusionH = regimen.infusionH ?? 0.5;
	const [row] = await getDb()
		.insert(orders)
		.values({ patientId: patient.id, agentId: agent.id, doseMg: regimen.doseMg, intervalH: regimen.intervalH, infusionH, startAt })
		.returning({ id: orders.id });
	return { id: row.id, patientId: patient.id, agent, ...regimen, infusionH, startAt };
}

export type Results = { creatinine: { at: Date; mgDl: number }[]; albumin: { at: Date; gL: number }[] };

/** Assesses an order at `at` from the results given, stores the assessment, and returns it as the feed would. */
export async function storeAssessment(
	order: Order,
	patient: Patient,
	results: Results,
	at: Date,
	status: 'active' | 'stopped' = 'active'
): Promise<StoredAssessment> {
	const creatinine = results.creatinine.filter((r) => r.at <= at);
	const albumin = results.albumin.filter((r) => r.at <= at);
	const assessment: Assessment = assess({
		at,
		patient: {
			ageYears: patient.ageYears,
			sex: patient.sex,
			heights: [{ at: new Date(order.startAt.getTime() - DAY_MS), cm: patient.heightCm }],
			weights: [{ at: new Date(order.startAt.getTime() - DAY_MS), kg: patient.weightKg }]
		},
		creatinine: creatinine.map((r) => ({ at: r.at, creatinine: { value: r.mgDl, unit: 'mg/dL' as const } })),
		albumin: albumin.map((r) => ({ at: r.at, gL: r.gL })),
		agent: order.agent.params,
		order: { doseMg: order.doseMg, intervalH: order.intervalH, infusionH: order.infusionH, route: 'iv', startAt: order.startAt }
	});
	const id = randomUUID();
	const { trace, ...result } = assessment;
	await getDb()
		.insert(assessments)
		.values({
			id,
			orderId: order.id,
			patientId: patient.id,
			at,
			complete: assessment.complete,
			crclMlMin: assessment.renal.crclMlMin,
			halfLifeH: assessment.kinetics.now?.halfLifeH ?? null,
			albuminGL: assessment.albumin.latestGL,
			result,
			trace
		});
	const times = [...creatinine, ...albumin].map((r) => r.at.getTime());
	return {
		assessmentId: id,
		orderId: order.id,
		patientId: patient.id,
		agent: { id: order.agent.id, code: order.agent.code, name: order.agent.name, agentClass: order.agent.agentClass, params: order.agent.params },
		order: { id: order.id, doseMg: order.doseMg, intervalH: order.intervalH, infusionH: order.infusionH, route: 'iv', startAt: order.startAt, status },
		assessment,
		lastResultAt: times.length ? new Date(Math.max(...times)) : null
	};
}

export async function openFlags(orderId: string) {
	return Array.from(
		(await getDb().execute(sql`select * from flags where order_id = ${orderId}::uuid and state <> 'closed' order by rule_key`)) as Iterable<
			Record<string, unknown>
		>
	);
}

export async function allFlags(orderId: string) {
	return Array.from(
		(await getDb().execute(sql`select * from flags where order_id = ${orderId}::uuid order by opened_at, rule_key`)) as Iterable<Record<string, unknown>>
	);
}

export async function findingsOf(flagId: string) {
	return Array.from(
		(await getDb().execute(sql`select * from flag_findings where flag_id = ${flagId}::uuid order by rule_key, raised_at`)) as Iterable<Record<string, unknown>>
	);
}

export async function eventsOf(flagId: string) {
	return Array.from(
		(await getDb().execute(sql`select kind, actor_id, from_state, to_state, data from flag_events where flag_id = ${flagId}::uuid order by id`)) as Iterable<{
			kind: string;
			actor_id: string | null;
			from_state: string | null;
			to_state: string | null;
			data: Record<string, unknown>;
		}>
	);
}

/** Cockcroft–Gault creatinine that gives the fixture patient a CrCl of `crcl` mL/min (97.2 / CrCl). */
export const scrFor = (crclMlMin: number) => (100 * 70) / (72 * crclMlMin);

/**
 * A meropenem order (renally cleared, fe 0.7) whose CrCl follows `crclByDay` (oldest first, one morning
 * result a day, the last one today), assessed and evaluated each day as the feed would.
 */
export async function meropenemHistory(meropenem: AgentRow, now: Date, crclByDay: number[]) {
	const ago = (h: number) => new Date(now.getTime() - h * HOUR_MS);
	const patient = await makePatient();
	const days = crclByDay.length;
	const order = await makeOrder(patient, meropenem, { doseMg: 1000, intervalH: 8 }, ago(days * 24 + 2));
	const results: Results = { creatinine: [{ at: ago(days * 24 + 3), mgDl: scrFor(crclByDay[0]) }], albumin: [{ at: ago(days * 24 + 3), gL: 40 }] };
	for (let d = 0; d < days; d++) {
		const at = ago((days - 1 - d) * 24 + 1);
		results.creatinine.push({ at: new Date(at.getTime() - HOUR_MS / 2), mgDl: scrFor(crclByDay[d]) });
		const stored = await storeAssessment(order, patient, results, at);
		await getDb().transaction((tx) => evaluateAssessments(tx, [stored]));
	}
	return order;
}

/** A ceftriaxone order (protein binding 90 %) whose albumin follows `albuminByDay`; CrCl steady at 100 mL/min. */
export async function ceftriaxoneHistory(ceftriaxone: AgentRow, now: Date, albuminByDay: number[]) {
	const ago = (h: number) => new Date(now.getTime() - h * HOUR_MS);
	const patient = await makePatient();
	const days = albuminByDay.length;
	const order = await makeOrder(patient, ceftriaxone, { doseMg: 2000, intervalH: 24 }, ago(days * 24 + 2));
	const results: Results = { creatinine: [{ at: ago(days * 24 + 3), mgDl: scrFor(100) }], albumin: [{ at: ago(days * 24 + 3), gL: albuminByDay[0] }] };
	for (let d = 0; d < days; d++) {
		const at = ago((days - 1 - d) * 24 + 1);
		results.creatinine.push({ at: new Date(at.getTime() - HOUR_MS / 2), mgDl: scrFor(100) });
		results.albumin.push({ at: new Date(at.getTime() - HOUR_MS / 2), gL: albuminByDay[d] });
		const stored = await storeAssessment(order, patient, results, at);
		await getDb().transaction((tx) => evaluateAssessments(tx, [stored]));
	}
	return order;
}
