// Which regimen of the agent library an order is held against today, and how its daily dose compares.
// One implementation, used by assess() and by the rule facts, so a flag page and a rule never disagree.
//   route → its bands (or none: not absorbed / no regimen for the route)
//   renal replacement therapy → the agent's regimen for it (a band kind beside the CrCl bands)
//   otherwise the default bands or an indication's bands, whichever the order's dose matches
//   (meningitis doses are compared with meningitis regimens), at today's dosing CrCl — or the top band
//   before the day a renal reduction applies (teicoplanin's loading days)
import { bandLabel, compareDailyDose, DEFAULT_BAND_TOLERANCE, findBand } from './regimen';
import { RRT_LABEL } from './renal-state';
import type { AgentParams, DoseBand, IndicationRegimen, RenalReplacementMode, RenalReplacementRegimen, Route, RouteParams } from './types';

/** Intermittent haemodialysis sessions per week, for the daily dose of an after-each-session regimen (common practice). */
export const SESSIONS_PER_WEEK = 3;

export type ReferenceRegimen = {
	kind: 'band' | 'indication' | 'renal-replacement';
	/** readable: "CrCl 20–39 mL/min", "CNS infection · CrCl 26–50 mL/min", "intermittent haemodialysis" */
	label: string;
	indication: string | null;
	/** dose per administration, mg (mg/kg × weight, unrounded); null when the regimen fixes no dose */
	doseMg: number | null;
	/** true when the library states the dose in mg: it is proposed exactly as stated */
	fixedDose: boolean;
	intervalH: number | null;
	afterEachSession: boolean;
	dailyDoseMg: number | null;
	aucGuided: boolean;
	/** no dose, not AUC-guided and not avoided: dose by levels */
	levelGuided: boolean;
	avoid: boolean;
	note: string | null;
	/** today's regimen is the full (top-band) regimen: nothing is reduced for renal reasons here */
	unadjusted: boolean;
	topDailyDoseMg: number | null;
	/** the renal reduction does not apply yet (day of therapy before the agent's renalAdjustmentFromDay) */
	reductionDeferred: boolean;
};

export type ReferenceArgs = {
	agent: AgentParams;
	route: Route;
	/** the CrCl dosing uses (null when unknown or on renal replacement therapy) */
	dosingCrclMlMin: number | null;
	renalReplacement: RenalReplacementMode | null;
	dayOfTherapy: number;
	/** the agent's Vd-basis weight, for mg/kg regimens */
	weightKg: number | null;
	orderDailyDoseMg: number;
	/** the order's infusion time, so an extended infusion is matched to the regimen it stands for */
	orderInfusionH?: number;
};

/** Why there is no regimen: the route (not absorbed, none for it), renal function, dialysis, or a missing weight. */
export type ReasonKind = 'route' | 'renal-function' | 'no-renal-function' | 'dialysis' | 'weight';

export type ReferenceResult = {
	reference: ReferenceRegimen | null;
	reason: string | null;
	reasonKind: ReasonKind | null;
	routeParams: RouteParams | null;
	/** the full daily dose of the regimen family the order's dose points at (default or indication) */
	familyTopDailyDoseMg: number | null;
};

/** Route parameters, with the agent-wide fallback for a library saved before routes were declared. */
export function routeParamsOf(agent: AgentParams, route: Route): RouteParams | null {
	if (agent.routes !== undefined && agent.routes !== null) return agent.routes[route] ?? null;
	if (route === 'po') return { bioavailability: agent.bioavailability, systemic: agent.bioavailability > 0, renalBands: null, note: null };
	return { bioavailability: 1, systemic: true, renalBands: 'iv', note: null };
}

/** The CrCl bands that apply by this route (null: none in the library). */
export function bandsForRoute(agent: AgentParams, routeParams: RouteParams): DoseBand[] | null {
	if (routeParams.renalBands === 'iv') return agent.renalBands;
	return routeParams.renalBands;
}

/**
 * True when the agent's dose depends on renal function: explicit in the library, or (for a library
 * saved before the flag existed) when its bands' daily doses differ.
 */
export function isRenallyAdjusted(agent: AgentParams): boolean {
	if (typeof agent.renallyAdjusted === 'boolean') return agent.renallyAdjusted;
	return bandsDiffer(agent.renalBands);
}

/** Daily doses of the bands differ (mg/kg bands compared per kg). */
export function bandsDiffer(bands: readonly DoseBand[]): boolean {
	const daily = new Set<string>();
	for (const b of bands) {
		if (b.aucGuided) return true;
		if (b.avoid || b.intervalH === null) daily.add('none');
		else daily.add(b.doseMg !== null ? `mg:${(b.doseMg * 24) / b.intervalH}` : `kg:${((b.doseMgPerKg ?? 0) * 24) / b.intervalH}`);
	}
	return daily.size > 1;
}

type Spec = {
	doseMg: number | null;
	doseMgPerKg: number | null;
	intervalH: number | null;
	afterEachSession?: boolean;
	avoid?: boolean;
	aucGuided?: boolean;
	note: string | null;
};

function doseOf(spec: Spec, weightKg: number | null): number | null {
	if (spec.doseMg !== null) return spec.doseMg;
	if (spec.doseMgPerKg !== null && weightKg !== null) return spec.doseMgPerKg * weightKg;
	return null;
}

function dailyOf(spec: Spec, weightKg: number | null): number | null {
	if (spec.avoid) return null;
	const dose = doseOf(spec, weightKg);
	if (dose === null) return null;
	if (spec.afterEachSession) return (dose * SESSIONS_PER_WEEK) / 7;
	return spec.intervalH === null ? null : (dose * 24) / spec.intervalH;
}

const topBand = (bands: readonly DoseBand[]) => findBand(bands, Number.MAX_VALUE);

type Family = { indication: IndicationRegimen | null; bands: readonly DoseBand[] | null; top: Spec };

function familyToday(
	f: Family,
	args: ReferenceArgs,
	renallyAdjusted: boolean
): { spec: Spec; band: DoseBand | null; deferred: boolean } | { reason: string; kind: ReasonKind } {
	if (f.bands === null) return { spec: f.top, band: null, deferred: false };
	const top = topBand(f.bands);
	if (!renallyAdjusted && top !== null) return { spec: top, band: top, deferred: false };
	const from = args.agent.renalAdjustmentFromDay;
	if (from !== null && from !== undefined && args.dayOfTherapy < from && top !== null) return { spec: top, band: top, deferred: true };
	if (args.dosingCrclMlMin === null) return { reason: 'no current renal function to choose a band', kind: 'no-renal-function' };
	const band = findBand(f.bands, args.dosingCrclMlMin);
	if (band === null) return { reason: 'no regimen for this renal function in the library', kind: 'renal-function' };
	return { spec: band, band, deferred: false };
}

/** The regimen the order is held against today, or the reason there is none. */
export function selectReference(args: ReferenceArgs): ReferenceResult {
	const { agent } = args;
	const routeParams = routeParamsOf(agent, args.route);
	const routeGap = (reason: string): ReferenceResult => ({ reference: null, reason, reasonKind: 'route', routeParams, familyTopDailyDoseMg: null });
	if (routeParams === null) return routeGap(`no ${ROUTE_WORD[args.route]} regimen for this agent in the library`);
	if (!routeParams.systemic) return routeGap(routeParams.note ?? 'not absorbed by this route: no systemic dosing');
	const bands = bandsForRoute(agent, routeParams);
	if (bands === null) return routeGap(routeParams.note ?? `no ${ROUTE_WORD[args.route]} regimen for this agent in the library`);
	const renallyAdjusted = isRenallyAdjusted(agent);

	if (args.renalReplacement !== null) {
		const name = RRT_LABEL[args.renalReplacement];
		const regimen: RenalReplacementRegimen | undefined = routeParams.renalBands === 'iv' ? agent.renalReplacement?.[args.renalReplacement] : undefined;
		if (!regimen) return { reference: null, reason: `no regimen for ${name} in the library`, reasonKind: 'dialysis', routeParams, familyTopDailyDoseMg: null };
		const reference = build('renal-replacement', name, null, regimen, args.weightKg, false, null, false);
		return {
			reference,
			reason: reference.dailyDoseMg === null ? reasonWithoutDose(reference, args.weightKg) : null,
			reasonKind: reference.dailyDoseMg === null ? 'dialysis' : null,
			routeParams,
			familyTopDailyDoseMg: null
		};
	}

	const families: Family[] = [{ indication: null, bands, top: topBand(bands) ?? bands[0] }];
	if (routeParams.renalBands === 'iv') {
		for (const ind of agent.indications ?? []) {
			if (ind.untilDay !== null && ind.untilDay !== undefined && args.dayOfTherapy > ind.untilDay) continue;
			families.push({
				indication: ind,
				bands: ind.renalBands,
				top: { doseMg: ind.doseMg, doseMgPerKg: ind.doseMgPerKg, intervalH: ind.intervalH, note: null }
			});
		}
	}
	// the family whose regimen (today's or its full one) the order's daily dose is closest to; the
	// default wins ties, so an indication is chosen only when the order's dose points at it
	let best: { family: Family; distance: number } | null = null;
	for (const family of families) {
		const today = familyToday(family, args, renallyAdjusted);
		const candidates = [dailyOf(family.top, args.weightKg), 'spec' in today ? dailyOf(today.spec, args.weightKg) : null];
		let distance = Infinity;
		for (const d of candidates) {
			if (d === null || !(d > 0)) continue;
			// an extended infusion inside the family's extended window is as close as it gets
			const within =
				args.orderInfusionH !== undefined &&
				compareDose({ agent, orderDailyDoseMg: args.orderDailyDoseMg, orderInfusionH: args.orderInfusionH, referenceDailyDoseMg: d, tolerance: 0 }).compared ===
					'within';
			distance = Math.min(distance, within ? 0 : Math.abs(Math.log(args.orderDailyDoseMg / d)));
		}
		if (best === null || distance < best.distance - 1e-9) best = { family, distance };
	}
	const family = (best as { family: Family }).family;
	const today = familyToday(family, args, renallyAdjusted);
	const familyTopDailyDoseMg = dailyOf(family.top, args.weightKg);
	if ('reason' in today) return { reference: null, reason: today.reason, reasonKind: today.kind, routeParams, familyTopDailyDoseMg };
	const label =
		family.indication === null
			? today.band === null
				? 'usual regimen'
				: bandLabel(today.band)
			: family.indication.label + (today.band === null ? '' : ' · ' + bandLabel(today.band));
	const topDaily = dailyOf(family.top, args.weightKg);
	const kind = family.indication === null ? 'band' : 'indication';
	const reference = build(
		kind,
		label,
		family.indication?.label ?? null,
		today.spec,
		args.weightKg,
		!renallyAdjusted || family.bands === null || today.spec === family.top,
		topDaily,
		today.deferred
	);
	const noDose = reference.dailyDoseMg === null && !reference.aucGuided;
	return {
		reference,
		reason: noDose ? reasonWithoutDose(reference, args.weightKg) : null,
		reasonKind: noDose ? (args.weightKg === null && !reference.avoid && !reference.levelGuided ? 'weight' : 'renal-function') : null,
		routeParams,
		familyTopDailyDoseMg
	};
}

const ROUTE_WORD: Record<Route, string> = { iv: 'intravenous', po: 'oral', im: 'intramuscular' };

function reasonWithoutDose(r: ReferenceRegimen, weightKg: number | null): string {
	if (r.avoid) return 'not recommended at this renal function' + (r.note ? ` (${r.note})` : '');
	// a library note that already says there is no fixed regimen stands alone (not repeated in brackets)
	if (r.levelGuided) return r.note && /level-guided|no fixed regimen/.test(r.note) ? r.note : 'level-guided: no fixed regimen' + (r.note ? ` (${r.note})` : '');
	if (weightKg === null) return 'weight-based regimen without a weight';
	return 'no regimen for this renal function in the library';
}

function build(
	kind: ReferenceRegimen['kind'],
	label: string,
	indication: string | null,
	spec: Spec,
	weightKg: number | null,
	sameAsTop: boolean,
	topDailyDoseMg: number | null,
	reductionDeferred: boolean
): ReferenceRegimen {
	const dailyDoseMg = dailyOf(spec, weightKg);
	const avoid = spec.avoid === true;
	const aucGuided = spec.aucGuided === true;
	const hasDose = spec.doseMg !== null || spec.doseMgPerKg !== null;
	return {
		kind,
		label,
		indication,
		doseMg: avoid ? null : doseOf(spec, weightKg),
		fixedDose: spec.doseMg !== null,
		intervalH: spec.intervalH,
		afterEachSession: spec.afterEachSession === true,
		dailyDoseMg,
		aucGuided,
		levelGuided: !avoid && !aucGuided && !hasDose,
		avoid,
		note: spec.note,
		unadjusted: kind !== 'renal-replacement' && dailyDoseMg !== null && (sameAsTop || (topDailyDoseMg !== null && dailyDoseMg >= topDailyDoseMg * (1 - 1e-9))),
		topDailyDoseMg,
		reductionDeferred
	};
}

export type DoseComparison = {
	/** order daily dose / the reference daily dose it is held against (1 inside an extended-infusion window) */
	ratio: number | null;
	compared: 'above' | 'within' | 'below' | 'unknown';
	/** true when the order runs as an extended or continuous infusion the agent recognises */
	extendedInfusion: boolean;
};

/** True when the order's infusion is long enough to count as extended or continuous for this agent. */
export function isExtendedInfusion(agent: AgentParams, infusionH: number): boolean {
	return agent.extendedInfusion != null && infusionH >= agent.extendedInfusion.minInfusionH;
}

/**
 * The order's daily dose against the reference's. An extended or continuous infusion reaches the same
 * time above MIC with less drug, so it counts as within from minDailyFraction × the reference up to the
 * reference itself (the agent library states the fraction).
 */
export function compareDose(args: {
	agent: AgentParams;
	orderDailyDoseMg: number;
	orderInfusionH: number;
	referenceDailyDoseMg: number | null;
	tolerance?: number;
}): DoseComparison {
	const extendedInfusion = isExtendedInfusion(args.agent, args.orderInfusionH);
	const ref = args.referenceDailyDoseMg;
	if (ref === null || !(ref > 0)) return { ratio: null, compared: 'unknown', extendedInfusion };
	let effective = ref;
	if (extendedInfusion) {
		const low = ref * (args.agent.extendedInfusion as { minDailyFraction: number }).minDailyFraction;
		effective = Math.min(ref, Math.max(low, args.orderDailyDoseMg));
	}
	return {
		ratio: args.orderDailyDoseMg / effective,
		compared: compareDailyDose(args.orderDailyDoseMg, effective, args.tolerance ?? DEFAULT_BAND_TOLERANCE),
		extendedInfusion
	};
}

/**
 * The usual maximum daily dose for this order, mg/day: the route's or the agent's (mg, or mg/kg on the
 * Vd weight), raised to the indication's own full regimen when the order is held against one.
 */
export function usualMaximumDailyMg(
	agent: AgentParams,
	routeParams: RouteParams | null,
	weightKg: number | null,
	reference: ReferenceRegimen | null
): number | null {
	let max: number | null = routeParams?.usualMaxDailyDoseMg ?? agent.usualMaxDailyDoseMg ?? null;
	if (max === null && agent.usualMaxDailyDoseMgPerKg != null && weightKg !== null) max = agent.usualMaxDailyDoseMgPerKg * weightKg;
	if (max !== null && reference !== null && reference.indication !== null && reference.topDailyDoseMg !== null) max = Math.max(max, reference.topDailyDoseMg);
	return max;
}

/** a daily dose more than 0.5 % over the usual maximum is above it (rounding of mg/kg doses aside) */
export const USUAL_MAX_MARGIN = 1.005;
