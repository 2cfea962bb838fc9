// The safety rules of a proposal, checked as properties over the whole agent library: every agent ×
// CrCl 1–250 mL/min × body sizes 40–220 kg (with and without a height) × routes × dialysis states ×
// a new and a running order. The checks are written here from the rules themselves (issue "Safe
// proposals"; the cited sources below), not by calling the code's own invariant checker, so a bug in
// that checker cannot hide a bug in the engine.
import fc from 'fast-check';
import { describe, expect, it } from 'vitest';
import { assess, bodySize, type AgentParams, type AssessInput, type Assessment, type RenalReplacementMode, type Route } from '../../../src/lib/clinical';
import { buildFacts, DEFAULT_RULES, evaluateRules } from '../../../src/lib/rules';
import agentsFile from '../../../fixtures/agents.json';

type LibraryAgent = AgentParams & { name: string; agentClass: string };
const agents = agentsFile.agents as unknown as LibraryAgent[];

const at = new Date('2026-06-01T08:00:00Z');
const hoursBefore = (h: number) => new Date(at.getTime() - h * 3_600_000);
const AGE = 50;

type Body = { label: string; sex: 'male' | 'female'; heightCm: number | null; weightKg: number };
const BODIES: Body[] = [
	{ label: '40 kg woman, 150 cm', sex: 'female', heightCm: 150, weightKg: 40 },
	{ label: '70 kg man, 175 cm', sex: 'male', heightCm: 175, weightKg: 70 },
	{ label: '120 kg man, 175 cm', sex: 'male', heightCm: 175, weightKg: 120 },
	{ label: '220 kg man, 180 cm', sex: 'male', heightCm: 180, weightKg: 220 },
	{ label: '150 kg woman, no height', sex: 'female', heightCm: null, weightKg: 150 }
];
const CRCLS = Array.from({ length: 250 }, (_, i) => i + 1);
const ROUTES: Route[] = ['iv', 'po', 'im'];
const DIALYSIS: (RenalReplacementMode | null)[] = [null, 'ihd', 'pd', 'crrt'];
/** findings about the regimen itself (the others describe the patient: AKI, albumin, ARC) */
/** the sweeps run some 100,000 assessments: a few seconds alone, longer on a busy two-core machine */
const SWEEP_TIMEOUT_MS = 60_000;
const REGIMEN_RULES = [
	'dose-above-band',
	'dose-below-band',
	'trough-above-limit',
	'vancomycin-auc-outside-target',
	'above-usual-maximum',
	'no-regimen-for-renal-function'
];

/** Creatinine that gives the wanted Cockcroft–Gault CrCl for this body (Cockcroft DW, Gault MH, Nephron 1976;16:31–41). */
function creatinineFor(body: Body, crclMlMin: number): number {
	const dosingKg = bodySize(body.heightCm, body.weightKg, body.sex === 'female', { obeseRatio: 1.2, bsaFormula: 'mosteller' }).dosingKg as number;
	return ((140 - AGE) * dosingKg * (body.sex === 'female' ? 0.85 : 1)) / (72 * crclMlMin);
}

function vdWeight(agent: AgentParams, body: Body): number {
	const b = bodySize(body.heightCm, body.weightKg, body.sex === 'female', { obeseRatio: 1.2, bsaFormula: 'mosteller' });
	if (agent.vdWeightBasis === 'actual') return body.weightKg;
	if (agent.vdWeightBasis === 'ideal') return b.idealKg ?? body.weightKg;
	if (agent.vdWeightBasis === 'adjusted') return b.adjustedKg ?? body.weightKg;
	return b.dosingKg ?? body.weightKg;
}

type Case = { agent: LibraryAgent; body: Body; crclMlMin: number; route: Route; dialysis: RenalReplacementMode | null; newOrder: boolean };

function input(c: Case, order?: { doseMg: number; intervalH: number; infusionH: number }): AssessInput {
	const scr = creatinineFor(c.body, c.crclMlMin);
	const usual = c.agent.usualDoseMg ?? Math.round((c.agent.usualDoseMgPerKg as number) * vdWeight(c.agent, c.body));
	const o = order ?? { doseMg: usual, intervalH: c.agent.usualIntervalH, infusionH: c.route === 'iv' ? c.agent.usualInfusionH : 0 };
	return {
		at,
		patient: {
			ageYears: AGE,
			sex: c.body.sex,
			heights: c.body.heightCm === null ? [] : [{ at: hoursBefore(100), cm: c.body.heightCm }],
			weights: [{ at: hoursBefore(100), kg: c.body.weightKg }],
			renalReplacement: c.dialysis === null ? [] : [{ mode: c.dialysis, from: hoursBefore(24 * 30), to: null }]
		},
		creatinine: [
			{ at: hoursBefore(40), creatinine: { value: scr, unit: 'mg/dL' } },
			{ at: hoursBefore(4), creatinine: { value: scr, unit: 'mg/dL' } }
		],
		albumin: [{ at: hoursBefore(4), gL: 40 }],
		agent: c.agent,
		order: { ...o, route: c.route, startAt: c.newOrder ? hoursBefore(1) : hoursBefore(72) }
	};
}

/** Steady-state trough of an intermittent infusion (Sawchuk RJ, Zaske DE, J Pharmacokinet Biopharm 1976;4:183–195). */
function troughMgL(doseMg: number, infusionH: number, tauH: number, volumeL: number, kPerH: number): number {
	const peak =
		infusionH > 0
			? ((doseMg / infusionH) * (1 - Math.exp(-kPerH * infusionH))) / (kPerH * volumeL * (1 - Math.exp(-kPerH * tauH)))
			: doseMg / volumeL / (1 - Math.exp(-kPerH * tauH));
	return peak * Math.exp(-kPerH * (tauH - infusionH));
}

/** Every dose the library states in mg (bands, indications, dialysis regimens): band doses are proposed as stated. */
function statedDosesMg(agent: AgentParams): Set<number> {
	const out = new Set<number>();
	const add = (d: number | null | undefined) => d != null && out.add(d);
	agent.renalBands.forEach((b) => add(b.doseMg));
	for (const r of Object.values(agent.routes ?? {})) if (r && Array.isArray(r.renalBands)) r.renalBands.forEach((b) => add(b.doseMg));
	for (const i of agent.indications ?? []) {
		add(i.doseMg);
		i.renalBands?.forEach((b) => add(b.doseMg));
	}
	for (const r of Object.values(agent.renalReplacement ?? {})) add(r?.doseMg);
	return out;
}

/** The safety rules a single proposal must meet; returns what it breaks. */
function broken(c: Case, a: Assessment): string[] {
	const p = a.dosing.proposed;
	const agent = c.agent;
	const out: string[] = [];
	const routeParams = agent.routes[c.route];
	if (!routeParams || !routeParams.systemic) {
		if (p !== null) out.push('a proposal for a route the library has no systemic regimen for');
		return out;
	}
	if (p === null) {
		if (!a.dosing.proposalReason) out.push('no proposal and no reason');
		// the engine's own last check (proposal-invariants.ts) must never be what stops a proposal
		if (a.dosing.proposalReason?.startsWith('withheld')) out.push(a.dosing.proposalReason);
		return out;
	}
	if (!(p.doseMg > 0) || !(p.intervalH > 0)) out.push('dose and interval must be positive');
	// infusion within the interval and the agent's maximum rate (vancomycin ≤ 10 mg/min: product information)
	if (p.infusionH > p.intervalH) out.push(`infusion ${p.infusionH} h longer than the interval ${p.intervalH} h`);
	if (c.route === 'iv' && agent.maxInfusionRateMgPerH !== null && p.doseMg / p.infusionH > agent.maxInfusionRateMgPerH + 1e-9) {
		out.push(`${p.doseMg} mg over ${p.infusionH} h is faster than ${agent.maxInfusionRateMgPerH} mg/h`);
	}
	if (c.route !== 'iv' && p.infusionH !== 0) out.push('an oral or IM dose with an infusion time');
	if (agent.maxDoseMg !== null && p.doseMg > agent.maxDoseMg) out.push(`dose ${p.doseMg} above the largest dose ${agent.maxDoseMg}`);
	// doses as the library states them, or on the agent's step
	const stated = statedDosesMg(agent);
	if (!stated.has(p.doseMg) && Math.abs(p.doseMg / agent.doseStepMg - Math.round(p.doseMg / agent.doseStepMg)) > 1e-9) {
		out.push(`dose ${p.doseMg} mg is neither a stated dose nor a multiple of the ${agent.doseStepMg}-mg step`);
	}
	// the proposal's own exposure inside the agent's limits (AUC24 = daily dose / CL; Rybak 2020 window 400–600)
	const k = a.kinetics.now;
	if (k !== null) {
		const f = routeParams.bioavailability;
		const auc = (f * p.doseMg * 24) / p.intervalH / k.clearanceLPerH;
		if (agent.aucTargetMgHL !== null) {
			if (auc > agent.aucTargetMgHL[1] + 1e-6) out.push(`predicted AUC24 ${auc.toFixed(0)} above ${agent.aucTargetMgHL[1]}`);
			if (agent.model === 'vancomycin' && auc < agent.aucTargetMgHL[0] - 1e-6) out.push(`predicted AUC24 ${auc.toFixed(0)} below ${agent.aucTargetMgHL[0]}`);
		}
		if (agent.troughMaxMgL !== null && c.route === 'iv') {
			const t = troughMgL(p.doseMg, p.infusionH, p.intervalH, k.volumeL, k.kPerH);
			if (t > agent.troughMaxMgL + 1e-9) out.push(`predicted trough ${t.toFixed(2)} above ${agent.troughMaxMgL}`);
		}
	}
	// loading dose: only before the second dose, larger than the maintenance dose, inside its window
	if (p.loadingDoseMg !== null) {
		if (!c.newOrder) out.push('a loading dose on a running order');
		if (!(p.loadingDoseMg > p.doseMg)) out.push(`loading ${p.loadingDoseMg} not above the maintenance dose ${p.doseMg}`);
		if (agent.loadingMaxMg !== null && p.loadingDoseMg > agent.loadingMaxMg) out.push(`loading ${p.loadingDoseMg} above ${agent.loadingMaxMg} mg`);
		const w = vdWeight(agent, c.body);
		if (agent.loadingMaxMgPerKg !== null && p.loadingDoseMg > agent.loadingMaxMgPerKg * w + 1e-9) out.push(`loading above ${agent.loadingMaxMgPerKg} mg/kg`);
		if (agent.loadingMinMgPerKg !== null && p.loadingDoseMg < agent.loadingMinMgPerKg * w - 1e-9 && p.loadingDoseMg !== agent.loadingMaxMg) {
			out.push(`loading below ${agent.loadingMinMgPerKg} mg/kg without reaching the cap`);
		}
	}
	// the agent's full-dose range: never a reduction for renal reasons (rounding to the step aside)
	const roundingMgPerDay = (agent.doseStepMg * 24) / p.intervalH;
	if (
		a.dosing.referenceUnadjusted &&
		a.dosing.bandDailyDoseMg !== null &&
		!p.afterEachSession &&
		(p.doseMg * 24) / p.intervalH < a.dosing.bandDailyDoseMg - roundingMgPerDay / 2 - 1e-9
	) {
		out.push('a reduction proposed in the full-dose range');
	}
	return out;
}

function* everyCase(): Generator<Case> {
	for (const agent of agents)
		for (const body of BODIES)
			for (const route of ROUTES)
				for (const dialysis of DIALYSIS)
					for (const newOrder of [true, false])
						for (const crclMlMin of dialysis === null ? CRCLS : [5, 60]) yield { agent, body, crclMlMin, route, dialysis, newOrder };
}

describe('every proposal the shipped library can produce is safe to show (sweep)', () => {
	it(
		'meets the single-proposal rules: exposure within limits, infusion, stated doses and steps, loading doses, no renal cut at full dose, a reason when absent',
		{ timeout: SWEEP_TIMEOUT_MS },
		() => {
			const failures: string[] = [];
			let proposals = 0;
			let cases = 0;
			for (const c of everyCase()) {
				cases++;
				const a = assess(input(c));
				if (a.dosing.proposed) proposals++;
				for (const b of broken(c, a))
					if (failures.length < 20)
						failures.push(
							`${c.agent.name}, ${c.body.label}, CrCl ${c.crclMlMin}, ${c.route}, ${c.dialysis ?? 'no dialysis'}, ${c.newOrder ? 'new' : 'running'}: ${b}`
						);
			}
			expect(failures).toEqual([]);
			// the sweep is not vacuous: most cases get a proposal
			expect(cases).toBeGreaterThan(50_000);
			expect(proposals / cases).toBeGreaterThan(0.3);
		}
	);

	it('never proposes a smaller daily dose as CrCl rises (common practice: more clearance never needs less drug)', { timeout: SWEEP_TIMEOUT_MS }, () => {
		const failures: string[] = [];
		for (const agent of agents)
			for (const body of BODIES)
				for (const route of ROUTES) {
					let previous: { crcl: number; daily: number } | null = null;
					for (const crclMlMin of CRCLS) {
						const p = assess(input({ agent, body, crclMlMin, route, dialysis: null, newOrder: false })).dosing.proposed;
						if (p === null) continue;
						const daily = (p.doseMg * 24) / p.intervalH;
						if (previous !== null && daily < previous.daily - 1e-9 && failures.length < 10) {
							failures.push(`${agent.name}, ${body.label}, ${route}: ${previous.daily} mg/day at CrCl ${previous.crcl} → ${daily} at ${crclMlMin}`);
						}
						previous = { crcl: crclMlMin, daily };
					}
				}
		expect(failures).toEqual([]);
	});

	it("raises no regimen finding of the default rules on Ebbline's own proposal, given as the order", { timeout: SWEEP_TIMEOUT_MS }, () => {
		const failures: string[] = [];
		let checked = 0;
		for (const c of everyCase()) {
			if (c.newOrder || (c.dialysis === null && c.crclMlMin % 7 !== 0)) continue;
			const p = assess(input(c)).dosing.proposed;
			if (p === null) continue;
			checked++;
			const again = input(c, { doseMg: p.doseMg, intervalH: p.intervalH, infusionH: p.infusionH });
			const a = assess(again);
			const facts = buildFacts({
				assessment: a,
				agent: { code: c.agent.code, name: c.agent.name, agentClass: c.agent.agentClass, params: c.agent },
				order: again.order
			});
			const held = evaluateRules(DEFAULT_RULES, facts).filter((o) => o.status === 'holds' && REGIMEN_RULES.includes(o.key));
			for (const h of held)
				if (failures.length < 20)
					failures.push(`${c.agent.name}, ${c.body.label}, CrCl ${c.crclMlMin}, ${c.route}, ${c.dialysis ?? '-'}: ${h.key} — ${h.finding}`);
		}
		expect(failures).toEqual([]);
		expect(checked).toBeGreaterThan(5_000);
	});
});

describe('random patients (fast-check): the same rules hold between the sweep points', () => {
	it('any agent, CrCl, weight, height, route, dialysis and day', { timeout: SWEEP_TIMEOUT_MS }, () => {
		fc.assert(
			fc.property(
				fc.constantFrom(...agents),
				fc.double({ min: 1, max: 250, noNaN: true }),
				fc.double({ min: 40, max: 220, noNaN: true }),
				fc.option(fc.double({ min: 150, max: 200, noNaN: true }), { nil: null }),
				fc.constantFrom<'male' | 'female'>('male', 'female'),
				fc.constantFrom(...ROUTES),
				fc.constantFrom(...DIALYSIS),
				fc.boolean(),
				(agent, crclMlMin, weightKg, heightCm, sex, route, dialysis, newOrder) => {
					const c: Case = { agent, body: { label: 'random', sex, heightCm, weightKg }, crclMlMin, route, dialysis, newOrder };
					expect(broken(c, assess(input(c)))).toEqual([]);
				}
			),
			{ numRuns: 3000, seed: 20261203 }
		);
	});
});
