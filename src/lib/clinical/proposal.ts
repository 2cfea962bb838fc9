// The proposal: a regimen a careful pharmacist could sign, or none with the reason. Built only from the
// agent library's regimens (CrCl band, indication, dialysis) or, for AUC-guided agents, from the AUC24
// target; every proposal is checked against the invariants in proposal-invariants.ts before it leaves.
import { predictExposure, type Exposure } from './exposure';
import { proposalViolations } from './proposal-invariants';
import { isExtendedInfusion, type ReferenceRegimen } from './reference-regimen';
import type { DosingBasis } from './renal-state';
import type { AgentParams, KineticsSnapshot, ProposedRegimen, Route, TherapyContext } from './types';

/** Intervals an AUC-guided proposal may use, with the 250-mg step their daily grids nest (500, 250, 125 mg/day). */
export const AUC_INTERVALS_H = [12, 24, 48] as const;
/** Aim a quarter of the way into the AUC window before rounding the daily dose up (common practice). */
export const AUC_AIM_FRACTION = 0.125;
/** Interval extensions tried when a band's regimen would leave the trough above the agent's limit. */
export const TROUGH_EXTENSION_INTERVALS_H = [36, 48] as const;
/** an after-each-session regimen stands for about two days between doses */
export const SESSION_INTERVAL_H = 48;

export type ProposalArgs = {
	agent: AgentParams;
	route: Route;
	therapy: TherapyContext;
	reference: ReferenceRegimen | null;
	referenceReason: string | null;
	dosingBasis: DosingBasis;
	/** drug kinetics now at the dosing CrCl (null when not modelled: dialysis, missing inputs) */
	kinetics: KineticsSnapshot | null;
	kineticsNote: string | undefined;
	/** the agent's Vd-basis weight (mg/kg regimens, loading window) */
	weightKg: number | null;
	order: { doseMg: number; intervalH: number; infusionH: number; dailyDoseMg: number };
	orderExposure: Exposure;
	/** the order's daily dose against the reference (extended-infusion window applied) */
	comparedToReference: 'above' | 'within' | 'below' | 'unknown';
	tolerance: number;
};

export type ProposalResult = { proposed: ProposedRegimen | null; reason: string | null; loadingNote: string | null };

const none = (reason: string): ProposalResult => ({ proposed: null, reason, loadingNote: null });

/** Round a computed dose to the agent's step (at least one step), never above its largest dose. */
export function roundToStepMg(doseMg: number, stepMg: number, maxDoseMg: number | null): number {
	let rounded = Math.max(stepMg, Math.round(doseMg / stepMg) * stepMg);
	if (maxDoseMg !== null && rounded > maxDoseMg) rounded = Math.floor(maxDoseMg / stepMg) * stepMg;
	return rounded;
}

/**
 * Infusion time: the agent's usual time (or the order's, when it runs as an extended infusion), at least
 * dose / the agent's maximum rate rounded up to half an hour; null when that would not fit the interval.
 */
export function chooseInfusionH(agent: AgentParams, route: Route, doseMg: number, intervalH: number, orderInfusionH: number): number | null {
	if (route !== 'iv') return 0;
	let infusionH = isExtendedInfusion(agent, orderInfusionH) ? Math.min(orderInfusionH, intervalH) : agent.usualInfusionH;
	if (agent.maxInfusionRateMgPerH != null && agent.maxInfusionRateMgPerH > 0) {
		const byRateH = Math.ceil((doseMg / agent.maxInfusionRateMgPerH) * 2 - 1e-9) / 2;
		if (byRateH > infusionH) infusionH = byRateH;
	}
	return infusionH <= intervalH ? infusionH : null;
}

/**
 * AUC-guided regimen (vancomycin): the interval is the shortest of 12, 24 or 48 h whose daily dose grid
 * (step × 24 / τ) is at most three quarters of the AUC window's width in mg/day at this clearance; the
 * daily dose is the aim (lower end + 12.5 % of the window) × CL rounded up to that grid. The grids nest
 * (500 ⊃ 250 ⊃ 125 mg/day) and the interval only shortens as clearance rises, so the proposed daily dose
 * never falls as CrCl rises, and the predicted AUC24 lands inside the window (between 12.5 % and 87.5 % of it).
 */
export function aucRegimen(agent: AgentParams, kinetics: KineticsSnapshot): { doseMg: number; intervalH: number } | { reason: string } {
	const [lo, hi] = agent.aucTargetMgHL as [number, number];
	const width = hi - lo;
	const cl = kinetics.clearanceLPerH;
	const step = agent.doseStepMg;
	const intervalH = AUC_INTERVALS_H.find((tau) => (step * 24) / tau <= 0.75 * width * cl);
	if (intervalH === undefined) return { reason: `clearance ${cl.toFixed(2)} L/h is too low for a fixed regimen at ${step}-mg steps: dose by measured levels` };
	const gridMgPerDay = (step * 24) / intervalH;
	const aimDaily = (lo + AUC_AIM_FRACTION * width) * cl;
	const daily = Math.ceil(aimDaily / gridMgPerDay - 1e-9) * gridMgPerDay;
	const doseMg = (daily * intervalH) / 24;
	if (agent.maxDoseMg !== null && doseMg > agent.maxDoseMg) {
		return {
			reason: `the AUC24 target needs ${Math.round(doseMg)} mg q${intervalH}h, above the library's largest dose of ${agent.maxDoseMg} mg: dose by measured levels`
		};
	}
	return { doseMg, intervalH };
}

function exposureProblem(agent: AgentParams, e: Exposure): string | null {
	if (agent.troughMaxMgL !== null && e.troughMgL !== null && e.troughMgL > agent.troughMaxMgL) {
		return `predicted trough ${e.troughMgL.toFixed(2)} mg/L above the limit of ${agent.troughMaxMgL} mg/L`;
	}
	if (agent.aucTargetMgHL !== null && e.auc24MgHL !== null && e.auc24MgHL > agent.aucTargetMgHL[1]) {
		return `predicted AUC24 ${Math.round(e.auc24MgHL)} mg·h/L above the target's ${agent.aucTargetMgHL[1]}`;
	}
	return null;
}

/** The proposal for one order. Pure; the caller traces the result. */
export function propose(args: ProposalArgs): ProposalResult {
	const { agent, reference, therapy } = args;
	if (!therapy.systemic) return none(args.referenceReason ?? 'not absorbed by this route: no systemic dosing');
	if (args.dosingBasis === 'unstable-no-kinetic-gfr')
		return none('creatinine is changing and kinetic GFR cannot be computed: no regimen until it settles or a level is measured');
	if (reference === null) return none(args.referenceReason ?? 'no regimen in the library applies');
	if (reference.avoid) return none(args.referenceReason ?? 'not recommended at this renal function');

	let regimen: { doseMg: number; intervalH: number; afterEachSession: boolean };
	let basis: string;
	if (reference.aucGuided) {
		if (agent.aucTargetMgHL === null) return none('the band is AUC-guided but the agent has no AUC24 target in the library');
		if (args.route !== 'iv') return none('AUC-guided regimens are proposed for intravenous orders only');
		if (args.kinetics === null) return none(`no AUC-guided regimen: ${args.kineticsNote ?? 'kinetics not computed'}`);
		const auc = aucRegimen(agent, args.kinetics);
		if ('reason' in auc) return none(auc.reason);
		regimen = { ...auc, afterEachSession: false };
		basis = `AUC24 target ${agent.aucTargetMgHL[0]}–${agent.aucTargetMgHL[1]} mg·h/L from the population clearance; daily dose rounded up to the ${agent.doseStepMg}-mg step`;
	} else {
		if (reference.levelGuided) return none(args.referenceReason ?? 'level-guided: no fixed regimen');
		if (reference.doseMg === null || reference.dailyDoseMg === null) return none(args.referenceReason ?? 'weight-based regimen without a weight');
		if (reference.unadjusted && args.order.dailyDoseMg > reference.dailyDoseMg * (1 + args.tolerance)) {
			return none(
				`renal function is in the range where ${reference.kind === 'indication' ? 'this indication' : 'the agent'} takes its full dose: nothing is reduced for renal reasons (a dose above the usual maximum is shown as its own finding)`
			);
		}
		if (therapy.extendedInfusion && args.comparedToReference === 'within') {
			return none("the current extended-infusion regimen already fits the library's regimen for today's renal function");
		}
		const doseMg = reference.fixedDose ? reference.doseMg : roundToStepMg(reference.doseMg, agent.doseStepMg, agent.maxDoseMg);
		regimen = reference.afterEachSession
			? { doseMg, intervalH: SESSION_INTERVAL_H, afterEachSession: true }
			: { doseMg, intervalH: reference.intervalH as number, afterEachSession: false };
		basis =
			(reference.kind === 'renal-replacement'
				? `the library's regimen for ${reference.label}`
				: `${reference.kind === 'indication' ? 'indication regimen' : 'renal band'} ${reference.label}`) +
			(reference.fixedDose ? ', dose as the library states it' : `; dose rounded to the ${agent.doseStepMg}-mg step`) +
			(reference.reductionDeferred ? `; renal reduction applies from day ${agent.renalAdjustmentFromDay}` : '');
	}

	// the regimen's own predicted exposure must respect the agent's limits; for a band regimen whose
	// trough would not, a longer interval is tried (extended-interval practice), else levels decide
	const iv = args.route === 'iv';
	let infusionH = chooseInfusionH(agent, args.route, regimen.doseMg, regimen.intervalH, args.order.infusionH);
	if (infusionH === null) return none(`the dose of ${regimen.doseMg} mg cannot be infused within the interval at the agent's maximum rate`);
	let predicted: Exposure | null = args.kinetics === null ? null : predictExposure({ ...regimen, infusionH }, args.kinetics, therapy.bioavailability, iv);
	let problem = predicted === null ? null : exposureProblem(agent, predicted);
	if (problem !== null && !reference.aucGuided && !regimen.afterEachSession) {
		for (const tau of TROUGH_EXTENSION_INTERVALS_H) {
			if (tau <= regimen.intervalH) continue;
			const inf = chooseInfusionH(agent, args.route, regimen.doseMg, tau, args.order.infusionH);
			if (inf === null) continue;
			const e = predictExposure({ doseMg: regimen.doseMg, intervalH: tau, infusionH: inf }, args.kinetics as KineticsSnapshot, therapy.bioavailability, iv);
			if (exposureProblem(agent, e) === null) {
				basis += `; interval extended from ${regimen.intervalH} h to ${tau} h so the predicted trough stays below the limit`;
				regimen = { ...regimen, intervalH: tau };
				infusionH = inf;
				predicted = e;
				problem = null;
				break;
			}
		}
	}
	if (problem !== null) return none(`level-guided: the library's regimen would give a ${problem}; dose by measured levels`);

	const loading = proposedLoadingDose(args, regimen.doseMg);
	const proposed: ProposedRegimen = {
		doseMg: regimen.doseMg,
		intervalH: regimen.intervalH,
		infusionH,
		loadingDoseMg: loading.doseMg,
		basis,
		...(regimen.afterEachSession ? { afterEachSession: true } : {}),
		predicted
	};
	const violations = proposalViolations({ agent, route: args.route, reference, therapy, kinetics: args.kinetics, weightKg: args.weightKg }, proposed);
	if (violations.length > 0) return none(`withheld: ${violations.join('; ')}`);
	return { proposed, reason: null, loadingNote: loading.note };
}

/**
 * A loading dose to consider: only for a new order (before its second dose) or a documented restart,
 * never when the current regimen's predicted exposure is already above the agent's limits. Vd × target
 * (÷ F), held inside the agent's mg/kg window and mg cap, rounded to its step, and only when larger
 * than the maintenance dose.
 */
export function proposedLoadingDose(args: ProposalArgs, maintenanceDoseMg: number): { doseMg: number | null; note: string | null } {
	const { agent, therapy } = args;
	if (agent.loadingTargetMgL === null) return { doseMg: null, note: null };
	if (!therapy.newOrder && !therapy.restarted)
		return {
			doseMg: null,
			note: `no loading dose: the order is running (dose ${therapy.dosesGiven} given); a loading dose belongs to the start of therapy or a documented restart`
		};
	if (args.kinetics === null || therapy.bioavailability <= 0) return { doseMg: null, note: 'no loading dose: volume of distribution not computed' };
	if (exposureProblem(agent, args.orderExposure) !== null)
		return { doseMg: null, note: 'no loading dose: the current regimen’s predicted exposure is already above the agent’s limits' };
	const w = args.weightKg;
	let ld = (args.kinetics.volumeL * agent.loadingTargetMgL) / therapy.bioavailability;
	const minMg = agent.loadingMinMgPerKg != null && w !== null ? agent.loadingMinMgPerKg * w : 0;
	let maxMg = agent.loadingMaxMgPerKg != null && w !== null ? agent.loadingMaxMgPerKg * w : Infinity;
	if (agent.loadingMaxMg != null) maxMg = Math.min(maxMg, agent.loadingMaxMg);
	ld = Math.min(Math.max(ld, minMg), maxMg);
	const step = agent.doseStepMg;
	let rounded = Math.round(ld / step) * step;
	if (rounded < minMg) rounded += step;
	while (rounded > maxMg + 1e-9) rounded -= step;
	if (!(rounded > maintenanceDoseMg)) return { doseMg: null, note: `no loading dose: it would not exceed the maintenance dose of ${maintenanceDoseMg} mg` };
	return { doseMg: rounded, note: null };
}
