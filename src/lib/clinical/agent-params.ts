// Agent parameters as assess() needs them: checked once per object (agents are loaded once and reused
// across many orders), and completed with safe defaults when a library was saved before a field existed.
import { ClinicalInputError, requireFraction, requireNonNegative, requirePositive } from './errors';
import { bandsDiffer } from './reference-regimen';
import type { AgentParams } from './types';

const completed = new WeakMap<AgentParams, AgentParams>();

/**
 * The agent with every field assess() reads. A library saved before routes, steps and the explicit
 * renal flag existed gets: renallyAdjusted when its bands differ; a 50-mg step; no maximum dose,
 * infusion rate, usual maximum, indications, dialysis regimens, loading window, extended infusion or
 * combination. Routes fall back in reference-regimen.routeParamsOf.
 */
export function completeAgent(agent: AgentParams): AgentParams {
	const cached = completed.get(agent);
	if (cached) return cached;
	validateAgent(agent);
	const full: AgentParams = {
		...agent,
		renallyAdjusted: typeof agent.renallyAdjusted === 'boolean' ? agent.renallyAdjusted : bandsDiffer(agent.renalBands),
		loadingMinMgPerKg: agent.loadingMinMgPerKg ?? null,
		loadingMaxMgPerKg: agent.loadingMaxMgPerKg ?? null,
		loadingMaxMg: agent.loadingMaxMg ?? null,
		doseStepMg: typeof agent.doseStepMg === 'number' && agent.doseStepMg > 0 ? agent.doseStepMg : 50,
		maxDoseMg: agent.maxDoseMg ?? null,
		maxInfusionRateMgPerH: agent.maxInfusionRateMgPerH ?? null,
		usualMaxDailyDoseMg: agent.usualMaxDailyDoseMg ?? null,
		usualMaxDailyDoseMgPerKg: agent.usualMaxDailyDoseMgPerKg ?? null,
		indications: agent.indications ?? [],
		renalReplacement: agent.renalReplacement ?? {},
		renalAdjustmentFromDay: agent.renalAdjustmentFromDay ?? null,
		extendedInfusion: agent.extendedInfusion ?? null,
		combination: agent.combination ?? null
	};
	completed.set(agent, full);
	completed.set(full, full);
	return full;
}

const validatedAgents = new WeakSet<AgentParams>();

/** Agent parameters are checked once per object. */
export function validateAgent(agent: AgentParams): void {
	if (validatedAgents.has(agent)) return;
	if (agent == null || typeof agent !== 'object') throw new ClinicalInputError('agent', agent, 'must be an object');
	requireFraction('agent.fe', agent.fe);
	requireFraction('agent.proteinBinding', agent.proteinBinding);
	if (agent.proteinBinding >= 1) throw new ClinicalInputError('agent.proteinBinding', agent.proteinBinding, 'must be < 1');
	requirePositive('agent.albuminRefGL', agent.albuminRefGL);
	requirePositive('agent.vdLPerKg', agent.vdLPerKg);
	if (!['actual', 'ideal', 'adjusted', 'dosing'].includes(agent.vdWeightBasis)) {
		throw new ClinicalInputError('agent.vdWeightBasis', agent.vdWeightBasis, "must be 'actual', 'ideal', 'adjusted' or 'dosing'");
	}
	requirePositive('agent.halfLifeNormalH', agent.halfLifeNormalH);
	if (!['generic', 'vancomycin', 'aminoglycoside'].includes(agent.model)) {
		throw new ClinicalInputError('agent.model', agent.model, "must be 'generic', 'vancomycin' or 'aminoglycoside'");
	}
	if (agent.usualDoseMg !== null) requirePositive('agent.usualDoseMg', agent.usualDoseMg);
	if (agent.usualDoseMgPerKg !== null) requirePositive('agent.usualDoseMgPerKg', agent.usualDoseMgPerKg);
	requirePositive('agent.usualIntervalH', agent.usualIntervalH);
	requireNonNegative('agent.usualInfusionH', agent.usualInfusionH);
	if (!Array.isArray(agent.renalBands)) throw new ClinicalInputError('agent.renalBands', agent.renalBands, 'must be an array');
	agent.renalBands.forEach((b, i) => {
		if (b.minCrclMlMin !== null) requireNonNegative(`agent.renalBands[${i}].minCrclMlMin`, b.minCrclMlMin);
		if (b.maxCrclMlMin !== null) requirePositive(`agent.renalBands[${i}].maxCrclMlMin`, b.maxCrclMlMin);
		if (b.minCrclMlMin !== null && b.maxCrclMlMin !== null && b.maxCrclMlMin <= b.minCrclMlMin) {
			throw new ClinicalInputError(`agent.renalBands[${i}].maxCrclMlMin`, b.maxCrclMlMin, 'must exceed minCrclMlMin');
		}
		if (b.doseMg !== null) requirePositive(`agent.renalBands[${i}].doseMg`, b.doseMg);
		if (b.doseMgPerKg !== null) requirePositive(`agent.renalBands[${i}].doseMgPerKg`, b.doseMgPerKg);
		if (b.intervalH !== null) requirePositive(`agent.renalBands[${i}].intervalH`, b.intervalH);
	});
	if (agent.adjustBy !== 'dose' && agent.adjustBy !== 'interval') {
		throw new ClinicalInputError('agent.adjustBy', agent.adjustBy, "must be 'dose' or 'interval'");
	}
	if (agent.troughMaxMgL !== null) requirePositive('agent.troughMaxMgL', agent.troughMaxMgL);
	if (agent.aucTargetMgHL !== null) {
		const [lo, hi] = agent.aucTargetMgHL;
		requirePositive('agent.aucTargetMgHL[0]', lo);
		requirePositive('agent.aucTargetMgHL[1]', hi);
		if (hi < lo) throw new ClinicalInputError('agent.aucTargetMgHL[1]', hi, 'must be ≥ aucTargetMgHL[0]');
	}
	if (agent.loadingTargetMgL !== null) requirePositive('agent.loadingTargetMgL', agent.loadingTargetMgL);
	requirePositive('agent.maxCreatinineAgeH', agent.maxCreatinineAgeH);
	requireFraction('agent.bioavailability', agent.bioavailability);
	if (agent.doseStepMg !== undefined && agent.doseStepMg !== null) requirePositive('agent.doseStepMg', agent.doseStepMg);
	if (agent.maxDoseMg != null) requirePositive('agent.maxDoseMg', agent.maxDoseMg);
	if (agent.maxInfusionRateMgPerH != null) requirePositive('agent.maxInfusionRateMgPerH', agent.maxInfusionRateMgPerH);
	if (agent.routes != null) {
		for (const [route, r] of Object.entries(agent.routes)) {
			if (r == null) continue;
			requireFraction(`agent.routes.${route}.bioavailability`, r.bioavailability);
			if (r.systemic && r.bioavailability <= 0)
				throw new ClinicalInputError(`agent.routes.${route}.bioavailability`, r.bioavailability, 'must be > 0 for a systemic route');
		}
	}
	validatedAgents.add(agent);
}
