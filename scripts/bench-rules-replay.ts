// Benchmark of rules.replay in-process: N active orders (default 50,000) with one realistic assessment
// each (assess() on invented patients, full trace stored), on a database of its own on the project's
// PostgreSQL cluster. Times three replays: the first (opens every flag), after publishing a stricter
// threshold (opens the newly flagged, refreshes the flags whose finding names the threshold), and a
// replay with nothing to change.
// Usage: npx tsx scripts/bench-rules-replay.ts [--orders=N] [--keep]   (drops its database at the end unless --keep)
import { readFileSync } from 'node:fs';
import { fileURLToPath } from 'node:url';
import { between as uniform, mulberry32 } from '../src/lib/domain/random';
import { assess, storeAssessInput, type AgentParams, type AssessInput } from '../src/lib/clinical';

const args = process.argv.slice(2);
const ordersArg = args.find((a) => a.startsWith('--orders='));
const ORDERS = ordersArg ? Number(ordersArg.slice('--orders='.length)) : 50_000;
const KEEP = args.includes('--keep');
const TEMPLATES_PER_AGENT = 25;
const HOUR_MS = 3_600_000;

type FixtureAgent = AgentParams & { agentClass: string; rxnormCode: string | null; synonyms: string[]; provenance: Record<string, string> };
const library = (JSON.parse(readFileSync(fileURLToPath(new URL('../fixtures/agents.json', import.meta.url)), 'utf8')) as { agents: FixtureAgent[] }).agents;

const random = mulberry32(0x5eed4321);
const between = (lo: number, hi: number) => uniform(random, lo, hi);

async function main() {
	const { ensureDependencies } = await import('./lib/system.mjs');
	const { ensurePostgres } = await import('./lib/postgres.mjs');
	const { createDatabaseIfMissing, dropDatabase } = await import('./lib/database.mjs');
	ensureDependencies();
	const cluster = ensurePostgres();
	const admin = cluster.url('postgres');
	const name = `ebbline_bench_replay_${Date.now()}`;
	await createDatabaseIfMissing(admin, name);
	process.env.DATABASE_URL = cluster.url(name);
	const { sql } = await import('drizzle-orm');
	const { migrateDatabase } = await import('./migrate');
	const { closeDb, getDb } = await import('../src/lib/server/db');
	const { stopBoss, useJobs } = await import('../src/lib/server/queue');
	useJobs(async () => (await import('../jobs/registry')).jobs); // publishing queues rules.replay
	const rules = await import('../src/lib/server/rules/rule-sets');
	const { replayActiveOrders } = await import('../src/lib/server/rules/replay');
	try {
		await migrateDatabase();
		const db = getDb();
		const now = new Date();
		const t0 = performance.now();
		const agentIds: string[] = [];
		for (const a of library) {
			const { provenance, synonyms, rxnormCode, agentClass, ...params } = a;
			const [row] = Array.from(
				(await db.execute(sql`insert into agents (code, name, agent_class, rxnorm_code, synonyms, params, provenance)
					values (${a.code}, ${a.name}, ${agentClass}, ${rxnormCode}, ${sql.param(synonyms)}::text[], ${JSON.stringify(params)}::jsonb, ${JSON.stringify(provenance)}::jsonb)
					returning id`)) as Iterable<{ id: string }>
			);
			agentIds.push(row.id);
		}
		// assessment templates: invented patients, creatinine trajectories and albumin per agent
		const templates: {
			agent: number;
			k: number;
			result: unknown;
			input: unknown;
			crcl: number | null;
			halfLife: number | null;
			albumin: number | null;
			complete: boolean;
		}[] = [];
		library.forEach((agent, i) => {
			for (let k = 0; k < TEMPLATES_PER_AGENT; k++) {
				const at = now;
				const h = (n: number) => new Date(at.getTime() - n * HOUR_MS);
				const base = between(0.6, 1.6);
				const trend = random() < 0.3 ? between(1.3, 2.5) : random() < 0.2 ? between(0.5, 0.8) : between(0.95, 1.05);
				const input: AssessInput = {
					at,
					patient: {
						ageYears: Math.round(between(20, 90)),
						sex: random() < 0.5 ? 'female' : 'male',
						heights: [{ at: h(200), cm: between(150, 195) }],
						weights: [{ at: h(200), kg: between(45, 140) }]
					},
					creatinine: [
						{ at: h(100), creatinine: { value: base, unit: 'mg/dL' } },
						{ at: h(50), creatinine: { value: base * (1 + (trend - 1) / 2), unit: 'mg/dL' } },
						{ at: h(8), creatinine: { value: base * trend, unit: 'mg/dL' } }
					],
					albumin: [
						{ at: h(100), gL: between(30, 45) },
						{ at: h(8), gL: between(18, 44) }
					],
					agent,
					order: {
						doseMg: agent.usualDoseMg ?? Math.round((agent.usualDoseMgPerKg ?? 5) * 70),
						intervalH: agent.usualIntervalH,
						infusionH: Math.min(agent.usualInfusionH, agent.usualIntervalH),
						route: 'iv',
						startAt: h(96)
					}
				};
				const assessment = assess(input);
				// stored as the app stores it: the inputs, not the trace
				const { trace, ...result } = assessment;
				void trace;
				templates.push({
					agent: i,
					k,
					result,
					input: storeAssessInput(input),
					crcl: assessment.renal.crclMlMin,
					halfLife: assessment.kinetics.now?.halfLifeH ?? null,
					albumin: assessment.albumin.latestGL,
					complete: assessment.complete
				});
			}
		});
		await db.transaction(async (tx) => {
			await tx.execute(
				sql`create temp table tpl (agent int, k int, result jsonb, input jsonb, crcl double precision, half_life double precision, albumin double precision, complete boolean) on commit drop`
			);
			for (let i = 0; i < templates.length; i += 50) {
				await tx.execute(sql`insert into tpl select * from jsonb_to_recordset(${JSON.stringify(templates.slice(i, i + 50))}::jsonb)
					as v(agent int, k int, result jsonb, input jsonb, crcl double precision, "halfLife" double precision, albumin double precision, complete boolean)`);
			}
			await tx.execute(
				sql`create temp table ids on commit drop as select g, gen_random_uuid() as patient_id, gen_random_uuid() as order_id from generate_series(1, ${ORDERS}::int) g`
			);
			await tx.execute(
				sql`insert into patients (id, mrn, given_name, family_name, birth_date, sex) select patient_id, 'B' || g, 'Bench', 'Patient ' || g, '1960-01-01', 'female' from ids`
			);
			await tx.execute(sql`insert into orders (id, patient_id, agent_id, dose_mg, interval_h, infusion_h, route, status, start_at)
				select ids.order_id, ids.patient_id, (${sql.param(agentIds)}::uuid[])[1 + (g % ${agentIds.length})],
					coalesce((a.params->>'usualDoseMg')::float8, round(coalesce((a.params->>'usualDoseMgPerKg')::float8, 5) * 70)),
					(a.params->>'usualIntervalH')::float8, least((a.params->>'usualInfusionH')::float8, (a.params->>'usualIntervalH')::float8), 'iv', 'active',
					${new Date(now.getTime() - 96 * HOUR_MS).toISOString()}::timestamptz
				from ids join agents a on a.id = (${sql.param(agentIds)}::uuid[])[1 + (g % ${agentIds.length})]`);
			await tx.execute(sql`insert into assessments (order_id, patient_id, at, complete, crcl_ml_min, half_life_h, albumin_gl, result, input, trace)
				select ids.order_id, ids.patient_id, ${now.toISOString()}::timestamptz, t.complete, t.crcl, t.half_life, t.albumin, t.result, t.input, null
				from ids join tpl t on t.agent = g % ${agentIds.length} and t.k = (g / ${agentIds.length}) % ${TEMPLATES_PER_AGENT}`);
		});
		await db.execute(sql`analyze`);
		console.log(
			`[bench] ${ORDERS.toLocaleString('en')} active orders with one assessment each (full trace) in ${((performance.now() - t0) / 1000).toFixed(1)} s`
		);

		await rules.seedDefaultVersion();
		const first = await replayActiveOrders();
		console.log(`[bench] replay 1 (default rules, opens every flag): ${(first.ms / 1000).toFixed(2)} s — ${JSON.stringify(first.totals)}`);

		const active = await rules.getActiveRuleSet();
		const stricter = structuredClone(active.rules);
		stricter.find((r) => r.key === 'possible-arc')!.params.arcCrclMlMin = 110;
		const draft = await rules.saveDraft(stricter, { basedOn: active.id }, { actorId: null, actorLabel: 'bench', requestId: null });
		await rules.publish(draft.id, { actorId: null, actorLabel: 'bench', requestId: null });
		const second = await replayActiveOrders();
		console.log(`[bench] replay 2 (after publishing ARC ≥ 110 mL/min): ${(second.ms / 1000).toFixed(2)} s — ${JSON.stringify(second.totals)}`);

		const third = await replayActiveOrders();
		console.log(`[bench] replay 3 (nothing to change): ${(third.ms / 1000).toFixed(2)} s — ${JSON.stringify(third.totals)}`);
	} finally {
		await stopBoss();
		await closeDb();
		if (KEEP) console.log(`[bench] kept database ${name}`);
		else await dropDatabase(admin, name);
	}
}

main().catch((error) => {
	console.error('[bench] failed:', error);
	process.exitCode = 1;
});
