// The safety rules every proposed regimen obeys, stated as code. propose() withholds any proposal that
// breaks one (with the rule in the reason), and the property tests sweep the whole agent library
// through them. Rules that compare proposals across patients (the daily dose never falls as CrCl rises;
// no default rule fires on Ebbline's own proposal) are checked by those tests.
import { predictExposure } from './exposure';
import type { ReferenceRegimen } from './reference-regimen';
import type { AgentParams, KineticsSnapshot, ProposedRegimen, Route, TherapyContext } from './types';

const EPS = 1e-9;

export type InvariantContext = {
	agent: AgentParams;
	route: Route;
	reference: ReferenceRegimen;
	therapy: TherapyContext;
	kinetics: KineticsSnapshot | null;
	weightKg: number | null;
};

/** The rules a proposal breaks (empty when it is safe to show). */
export function proposalViolations(ctx: InvariantContext, p: ProposedRegimen): string[] {
	const { agent, reference, therapy } = ctx;
	const v: string[] = [];
	if (!therapy.systemic) v.push('a proposal for a route the agent is not absorbed by');
	if (!(p.doseMg > 0) || !Number.isFinite(p.doseMg)) v.push('dose must be a positive number');
	if (!(p.intervalH > 0) || !Number.isFinite(p.intervalH)) v.push('interval must be a positive number');
	if (!(p.infusionH >= 0) || p.infusionH > p.intervalH + EPS) v.push('infusion must fit inside the interval');
	if (ctx.route === 'iv' && agent.maxInfusionRateMgPerH != null && p.infusionH > 0 && p.doseMg / p.infusionH > agent.maxInfusionRateMgPerH * (1 + EPS)) {
		v.push(`infusion faster than the agent's maximum of ${agent.maxInfusionRateMgPerH} mg/h`);
	}
	if (ctx.route === 'iv' && agent.maxInfusionRateMgPerH != null && p.infusionH === 0) v.push('an IV dose of a rate-limited agent needs an infusion time');
	if (agent.maxDoseMg !== null && p.doseMg > agent.maxDoseMg + EPS) v.push(`dose above the library's largest dose of ${agent.maxDoseMg} mg`);
	// doses: a band's stated mg dose exactly; a computed one on the agent's step
	if (!reference.aucGuided && reference.fixedDose) {
		if (p.doseMg !== reference.doseMg) v.push(`the band states ${reference.doseMg} mg; the proposal must use it as stated`);
	} else if (Math.abs(p.doseMg / agent.doseStepMg - Math.round(p.doseMg / agent.doseStepMg)) > 1e-6) {
		v.push(`a computed dose must be a multiple of the agent's ${agent.doseStepMg}-mg step`);
	}
	// no renal reduction in the full-dose range
	const proposedDailyMg = (p.doseMg * 24) / p.intervalH;
	if (reference.unadjusted && reference.dailyDoseMg !== null && !p.afterEachSession && proposedDailyMg < reference.dailyDoseMg * (1 - 0.2)) {
		v.push('a reduction proposed where the agent takes its full dose');
	}
	// the proposal's own predicted exposure inside the agent's limits
	if (ctx.kinetics !== null) {
		const e = predictExposure(p, ctx.kinetics, therapy.bioavailability, ctx.route === 'iv');
		if (agent.troughMaxMgL !== null && e.troughMgL !== null && e.troughMgL > agent.troughMaxMgL * (1 + EPS)) {
			v.push(`predicted trough ${e.troughMgL.toFixed(2)} mg/L above the limit of ${agent.troughMaxMgL} mg/L`);
		}
		if (agent.aucTargetMgHL !== null && e.auc24MgHL !== null) {
			const [lo, hi] = agent.aucTargetMgHL;
			if (e.auc24MgHL > hi * (1 + EPS)) v.push(`predicted AUC24 ${Math.round(e.auc24MgHL)} above the target's ${hi} mg·h/L`);
			if (reference.aucGuided && e.auc24MgHL < lo * (1 - EPS)) v.push(`predicted AUC24 ${Math.round(e.auc24MgHL)} below the target's ${lo} mg·h/L`);
		}
	}
	// a loading dose only at the start or a restart, larger than the maintenance dose, inside its window
	if (p.loadingDoseMg !== null) {
		if (!therapy.newOrder && !therapy.restarted) v.push('a loading dose on an order already running');
		if (!(p.loadingDoseMg > p.doseMg)) v.push('a loading dose no larger than the maintenance dose');
		if (agent.loadingTargetMgL === null) v.push('a loading dose for an agent without one');
		if (agent.loadingMaxMg != null && p.loadingDoseMg > agent.loadingMaxMg + EPS) v.push(`loading dose above the cap of ${agent.loadingMaxMg} mg`);
		const w = ctx.weightKg;
		if (w !== null && agent.loadingMaxMgPerKg != null && p.loadingDoseMg > agent.loadingMaxMgPerKg * w + EPS)
			v.push(`loading dose above ${agent.loadingMaxMgPerKg} mg/kg`);
		const capped = agent.loadingMaxMg != null && p.loadingDoseMg + agent.doseStepMg > agent.loadingMaxMg;
		if (w !== null && agent.loadingMinMgPerKg != null && p.loadingDoseMg < agent.loadingMinMgPerKg * w - EPS && !capped)
			v.push(`loading dose below ${agent.loadingMinMgPerKg} mg/kg`);
	}
	return v;
}
