// Fixtures for `npm run bench` and `npm run load`, run with tsx against DATABASE_URL before the app
// starts. Everything goes through Ebbline's own services: the demo staff, the default rule set, the
// agent library, invented patients and orders through the feed's ingest, their first assessments
// through the order.reassess code, a feed token, and extra sign-in accounts for the load test.
//
//   tsx scripts/bench/fixture.ts bench <bundles.json> [<freshness.json>]
//                                                       → a line `FIXTURE {"token": …, "patients": …, …}`;
//                                                         with <freshness.json>, the freshness stage's
//                                                         results too (see freshnessBundles)
//   tsx scripts/bench/fixture.ts load <users>           → a line `FIXTURE {"users": [{ email, password }]}`
import { writeFileSync } from 'node:fs';
import { eq } from 'drizzle-orm';
import { closeDb, getDb } from '../../src/lib/server/db';
import { orders, patients } from '../../src/lib/server/db/schema';
import { albuminAt, albuminEntry, bundle, creatinineAt, creatinineEntry, demoPhysicians, encounterEntry, heightEntry, orderEntry, planFor, regimenFor, weightEntry, patientEntry, type FhirEntry, type PatientPlan, seedDemo, seedAgents, seedUsers } from '../../src/lib/server/demo';
import { mulberry32 } from '../../src/lib/domain/random';
import { bundleSchema, ingestBundle } from '../../src/lib/server/feed';
import { feedTokens, users } from '../../src/lib/server/auth';
import { orderReassess } from '../../jobs/order-reassess';
import { reassessOrders } from '../../src/lib/server/reassess';
import { seedDefaultVersion } from '../../src/lib/server/rules';

const DAY_MS = 86_400_000;
const HOUR_MS = 3_600_000;
const ACTOR = { actorId: null, actorLabel: 'bench fixture', requestId: null };

export const BENCH_PATIENTS = 2_500;
export const ORDERS_PER_PATIENT = 2;
/** rounds of draws in the burst: each round one creatinine and one albumin for every patient */
export const BURST_ROUNDS = 4;
export const ENTRIES_PER_BUNDLE = 100;
/** the freshness stage's steady stream: one draw (2 results) for each of 1,500 patients, four patients a bundle */
export const STEADY_PATIENTS = 1_500;
export const STEADY_PATIENTS_PER_BUNDLE = 4;

/** Agents a bench patient may get as a second order (ATC codes of the example library). */
const SECOND_AGENTS = ['J01DD04', 'J01CF05', 'J01MA12', 'J01XA01', 'J01DH02', 'J01CR05', 'J01GB03', 'J01EE01'];

function benchPlan(i: number): PatientPlan {
	const sourceId = `bench-p-${String(i).padStart(5, '0')}`;
	// invented MRNs in their own range, so no two bench patients collide
	return { ...planFor(sourceId), mrn: `BEN${String(i).padStart(7, '0')}`, admittedDaysAgo: 3 };
}

function shuffled<T>(list: T[], seed: number): T[] {
	const rng = mulberry32(seed);
	const out = [...list];
	for (let i = out.length - 1; i > 0; i--) {
		const j = Math.floor(rng() * (i + 1));
		[out[i], out[j]] = [out[j], out[i]];
	}
	return out;
}

async function ingest(entries: FhirEntry[], now: Date) {
	const message = bundle(entries);
	const envelope = bundleSchema.parse(message);
	// the fixture assesses every order itself below, so it queues no jobs
	const result = await ingestBundle(JSON.stringify(message), envelope, { source: 'seed', actor: ACTOR, now, enqueue: false });
	if (result.counts.quarantined > 0) {
		const first = result.entries.find((e) => e.outcome === 'quarantined');
		throw new Error(`bench fixture: ${result.counts.quarantined} entries quarantined (first: ${JSON.stringify(first)})`);
	}
}

type ProbedResult = { mrn: string; analyte: 'creatinine' | 'albumin'; at: string };
type ProbedBundle = { body: string; results: ProbedResult[] };

function drawBundle(draws: { plan: PatientPlan; at: Date; key: string; days: number }[]): ProbedBundle {
	const entries: FhirEntry[] = [];
	const results: ProbedResult[] = [];
	for (const { plan, at, key, days } of draws) {
		entries.push(creatinineEntry(plan, creatinineAt(plan, days, key), at), albuminEntry(plan, albuminAt(plan, days, key), at));
		results.push({ mrn: plan.mrn, analyte: 'creatinine', at: at.toISOString() }, { mrn: plan.mrn, analyte: 'albumin', at: at.toISOString() });
	}
	return { body: JSON.stringify(bundle(entries)), results };
}

/**
 * The freshness stage's results, all drawn after the feed stage's burst so that each is its patient's
 * newest: a second burst of the same shape (four rounds, 50, 40, 30 and 20 minutes before now, 20,000
 * results in bundles of 100), then a steady stream (one draw each for 1,500 patients, from 10
 * minutes before now a second apart per bundle, in bundles of four patients: 8 results). Each bundle lists its results; `orders`
 * maps each patient's MRN to its active order ids.
 */
async function freshnessBundles(plans: PatientPlan[], now: Date, admittedAt: Date) {
	// whole seconds: the entries carry their time to the second, and the probe compares it with the time stored
	const base = Math.floor(now.getTime() / 1000) * 1000;
	const draw = (plan: PatientPlan, at: Date, key: string) => ({ plan, at, key, days: (at.getTime() - admittedAt.getTime()) / DAY_MS });
	const burst: ProbedBundle[] = [];
	for (let round = 0; round < BURST_ROUNDS; round++) {
		const at = new Date(base - [50, 40, 30, 20][round] * 60_000);
		const order = shuffled(plans, 2000 + round);
		for (let i = 0; i < order.length; i += ENTRIES_PER_BUNDLE / 2) {
			burst.push(drawBundle(order.slice(i, i + ENTRIES_PER_BUNDLE / 2).map((plan) => draw(plan, at, `f${round}`))));
		}
	}
	const steady: ProbedBundle[] = [];
	const stream = shuffled(plans, 3000).slice(0, STEADY_PATIENTS);
	for (let i = 0; i < stream.length; i += STEADY_PATIENTS_PER_BUNDLE) {
		const at = new Date(base - 10 * 60_000 + (i / STEADY_PATIENTS_PER_BUNDLE) * 1000);
		steady.push(drawBundle(stream.slice(i, i + STEADY_PATIENTS_PER_BUNDLE).map((plan) => draw(plan, at, 's'))));
	}
	const rows = await getDb().select({ mrn: patients.mrn, orderId: orders.id }).from(orders).innerJoin(patients, eq(patients.id, orders.patientId)).where(eq(orders.status, 'active'));
	const byMrn: Record<string, string[]> = {};
	for (const r of rows) (byMrn[r.mrn] ??= []).push(r.orderId);
	return { orders: byMrn, burst, steady };
}

/**
 * 2,500 invented patients admitted three days ago, each with height, weight, an admission creatinine and
 * albumin and two active anti-infective orders (5,000), all assessed; and the burst the bench will post:
 * four rounds of draws (a creatinine and an albumin per patient per round, 20,000 results) as FHIR
 * bundles of 100 entries, patients in a different order each round.
 */
async function benchFixture(bundlesPath: string, freshnessPath?: string) {
	const now = new Date();
	await seedUsers();
	await seedDefaultVersion();
	await seedAgents();
	const physicians = demoPhysicians();
	const admittedAt = new Date(now.getTime() - 3 * DAY_MS);
	const plans: PatientPlan[] = [];
	let entries: FhirEntry[] = [];
	for (let i = 1; i <= BENCH_PATIENTS; i++) {
		const plan = benchPlan(i);
		plans.push(plan);
		const first = new Date(admittedAt.getTime() + HOUR_MS);
		entries.push(
			patientEntry(plan, now),
			encounterEntry(plan, `BN-${String(i).padStart(4, '0')}`, admittedAt),
			heightEntry(plan, first),
			weightEntry(plan, plan.weightKg, first),
			creatinineEntry(plan, creatinineAt(plan, 0.05, 'admit'), first),
			albuminEntry(plan, albuminAt(plan, 0.05, 'admit'), first)
		);
		const codes = [...new Set(plan.orders.map((o) => o.agentCode))];
		for (const code of SECOND_AGENTS) if (codes.length < ORDERS_PER_PATIENT && !codes.includes(code)) codes.push(code);
		codes.slice(0, ORDERS_PER_PATIENT).forEach((code, k) => {
			const startAt = new Date(admittedAt.getTime() + (3 + 5 * k) * HOUR_MS);
			const regimen = regimenFor(plan, code, 'iv', false, plan.baselineCreatinineMgDl);
			entries.push(orderEntry(plan, `bench-rx-${String(i).padStart(5, '0')}-${k + 1}`, code, 'iv', regimen, startAt, physicians[(i + k) % physicians.length]));
		});
		if (i % 40 === 0 || i === BENCH_PATIENTS) {
			await ingest(entries, now);
			entries = [];
		}
	}
	const active = await getDb().select({ id: orders.id }).from(orders).where(eq(orders.status, 'active'));
	let assessed = 0;
	for (let i = 0; i < active.length; i += 250) {
		assessed += (await reassessOrders(active.slice(i, i + 250).map((o) => o.id), { now })).assessed;
	}

	// The burst: rounds 18, 12, 6 and 1 hours before now.
	const bundles: string[] = [];
	let burstResults = 0;
	for (let round = 0; round < BURST_ROUNDS; round++) {
		const at = new Date(now.getTime() - [18, 12, 6, 1][round] * HOUR_MS + round * 60_000);
		const days = (at.getTime() - admittedAt.getTime()) / DAY_MS;
		let chunk: FhirEntry[] = [];
		for (const plan of shuffled(plans, 1000 + round)) {
			chunk.push(creatinineEntry(plan, creatinineAt(plan, days, `r${round}`), at), albuminEntry(plan, albuminAt(plan, days, `r${round}`), at));
			burstResults += 2;
			if (chunk.length === ENTRIES_PER_BUNDLE) {
				bundles.push(JSON.stringify(bundle(chunk)));
				chunk = [];
			}
		}
		if (chunk.length > 0) bundles.push(JSON.stringify(bundle(chunk)));
	}
	writeFileSync(bundlesPath, JSON.stringify(bundles));
	if (freshnessPath) writeFileSync(freshnessPath, JSON.stringify(await freshnessBundles(plans, now, admittedAt)));
	const token = await feedTokens.create('bench feed', ACTOR);
	return {
		token: token.secret,
		patients: plans.length,
		orders: active.length,
		assessed,
		burstResults,
		bundles: bundles.length,
		reassess: { queue: orderReassess.queue, work: orderReassess.work, concurrency: orderReassess.concurrency ?? 1 }
	};
}

/** The Larkspur Bay demo (staff, agents, rules, hospital) plus `count` pharmacists with their own passwords. */
async function loadFixture(count: number) {
	await seedDemo({ days: 0 });
	const accounts: { email: string; password: string }[] = [];
	for (let i = 1; i <= count; i++) {
		const email = `load-pharmacist-${String(i).padStart(2, '0')}@larkspur.test`;
		const password = `load-test-${i}-${Math.random().toString(36).slice(2, 10)}`;
		await users.create({ email, displayName: `Load Pharmacist ${i}`, role: 'pharmacist', password }, ACTOR);
		accounts.push({ email, password });
	}
	return { users: accounts };
}

const [mode, arg, arg2] = process.argv.slice(2);
try {
	const out = mode === 'bench' ? await benchFixture(arg, arg2) : mode === 'load' ? await loadFixture(Number(arg)) : null;
	if (!out) throw new Error('usage: fixture.ts bench <bundles.json> | load <users>');
	process.stdout.write(`FIXTURE ${JSON.stringify(out)}\n`);
} catch (error) {
	console.error(error);
	process.exitCode = 1;
} finally {
	await closeDb();
}
