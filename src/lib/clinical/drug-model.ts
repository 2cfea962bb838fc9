// The drug model: clearance and volume of distribution of one agent from renal function, body size and
// (for highly bound agents) the unbound fraction at the current albumin. Used for "now", for the
// order's start, and for every regimen the proposal tries.
import { albuminAdjustedKineticsRaw, HIGHLY_BOUND_THRESHOLD, MAX_FU_RATIO } from './albumin';
import { vancomycinClearanceLPerH, AMINOGLYCOSIDE_K_INTERCEPT, AMINOGLYCOSIDE_K_SLOPE } from './kinetics';
import { renalAdjustmentFactorRaw } from './regimen';
import { input, SOURCES, step } from './trace';
import type { AgentParams, KineticsSnapshot, TraceStep } from './types';

export type DrugModelResult = {
	snapshot: KineticsSnapshot;
	/** the same model at the reference albumin (renal change only) */
	atReferenceAlbumin: KineticsSnapshot;
	/** Giusti–Hayton Q (generic model) or null */
	q: number | null;
	clearanceBeforeAlbuminLPerH: number;
	volumeBeforeAlbuminL: number;
	renalClearanceLPerH: number;
	albumin: ReturnType<typeof albuminAdjustedKineticsRaw> | null;
};

const snapshot = (clearanceLPerH: number, volumeL: number): KineticsSnapshot => {
	const kPerH = clearanceLPerH / volumeL;
	return { clearanceLPerH, volumeL, kPerH, halfLifeH: Math.LN2 / kPerH };
};

/** Drug CL and Vd from CrCl, the Vd weight and (for highly bound agents) the unbound fraction. */
export function drugModel(
	agent: AgentParams,
	crclMlMin: number,
	vdWeightKg: number,
	crclNormalMlMin: number,
	arc: boolean,
	fuRef: number,
	fuNew: number | null
): DrugModelResult {
	const volumeL = agent.vdLPerKg * vdWeightKg;
	let clearanceLPerH: number;
	let renalClearanceLPerH: number;
	let q: number | null = null;
	if (agent.model === 'vancomycin') {
		clearanceLPerH = vancomycinClearanceLPerH(crclMlMin);
		renalClearanceLPerH = agent.fe * clearanceLPerH;
	} else if (agent.model === 'aminoglycoside') {
		clearanceLPerH = (AMINOGLYCOSIDE_K_SLOPE * crclMlMin + AMINOGLYCOSIDE_K_INTERCEPT) * volumeL;
		renalClearanceLPerH = agent.fe * clearanceLPerH;
	} else {
		const clearanceNormalLPerH = (Math.LN2 * volumeL) / agent.halfLifeNormalH;
		// ARC is modelled deliberately: above the normal CrCl the renal part keeps rising (ratio not capped).
		q = renalAdjustmentFactorRaw(agent.fe, crclMlMin, crclNormalMlMin, arc);
		clearanceLPerH = clearanceNormalLPerH * q;
		renalClearanceLPerH = clearanceLPerH - clearanceNormalLPerH * (1 - agent.fe);
	}
	const atReferenceAlbumin = snapshot(clearanceLPerH, volumeL);
	let albumin: DrugModelResult['albumin'] = null;
	let result = atReferenceAlbumin;
	if (fuNew !== null && agent.proteinBinding >= HIGHLY_BOUND_THRESHOLD) {
		albumin = albuminAdjustedKineticsRaw(clearanceLPerH, renalClearanceLPerH, volumeL, vdWeightKg, crclMlMin, fuRef, fuNew);
		result = snapshot(albumin.clearanceLPerH, albumin.volumeL);
	}
	return { snapshot: result, atReferenceAlbumin, q, clearanceBeforeAlbuminLPerH: clearanceLPerH, volumeBeforeAlbuminL: volumeL, renalClearanceLPerH, albumin };
}

const MODEL_FORMULA = {
	vancomycin: 'Matzke: CL (mL/min) = 3.66 + 0.689 × CrCl; × 0.06 → L/h',
	aminoglycoside: 'k = 0.00293 × CrCl + 0.014 h⁻¹; CL = k × Vd',
	generic: 'CL = Q × CL_normal, CL_normal = ln2 × Vd / t½_normal, Q = 1 − fe × (1 − CrCl / CrCl_normal)'
} as const;

const MODEL_SOURCE = { vancomycin: SOURCES.matzke, aminoglycoside: SOURCES.aminoglycoside, generic: SOURCES.giustiHayton } as const;

/** The trace of the drug model now: Q, Vd, CL, the albumin adjustment, k and t½. */
export function drugModelTrace(args: {
	agent: AgentParams;
	model: DrugModelResult | null;
	crclMlMin: number | null;
	crclNormalMlMin: number;
	crclNormalFromSettings: boolean;
	arc: boolean;
	vdWeightKg: number | null;
	vdWeightSource: string;
	fuNow: number | null;
	fuRef: number;
	note: string | undefined;
}): TraceStep[] {
	const { agent, model, note } = args;
	const highlyBound = agent.proteinBinding >= HIGHLY_BOUND_THRESHOLD;
	const trace: TraceStep[] = [];
	if (agent.model === 'generic') {
		trace.push(
			step(
				'renalFactor',
				'Renal dose-adjustment factor Q',
				model === null ? null : model.q,
				'1',
				'Q = 1 − fe × (1 − CrCl / CrCl_normal); ratio capped at 1 unless possible ARC',
				[
					input('fe', agent.fe, '1', SOURCES.agentLibrary),
					input('CrCl', args.crclMlMin, 'mL/min', 'step dosingCrcl'),
					input('CrCl_normal', args.crclNormalMlMin, 'mL/min', args.crclNormalFromSettings ? 'settings' : 'default')
				],
				SOURCES.giustiHayton,
				model === null ? note : args.arc ? 'possible ARC: ratio not capped, renal clearance above normal' : undefined
			)
		);
	}
	trace.push(
		step(
			'volume',
			'Volume of distribution (reference albumin)',
			model === null ? null : model.volumeBeforeAlbuminL,
			'L',
			'Vd = Vd per kg × weight',
			[input('Vd per kg', agent.vdLPerKg, 'L/kg', SOURCES.agentLibrary), input('weight', args.vdWeightKg, 'kg', args.vdWeightSource)],
			agent.model === 'generic' ? SOURCES.agentLibrary : MODEL_SOURCE[agent.model],
			model === null ? note : undefined
		),
		step(
			'clearance',
			'Drug clearance (reference albumin)',
			model === null ? null : model.clearanceBeforeAlbuminLPerH,
			'L/h',
			MODEL_FORMULA[agent.model],
			agent.model === 'generic'
				? [
						input('Vd', model === null ? null : model.volumeBeforeAlbuminL, 'L', 'step volume'),
						input('t½_normal', agent.halfLifeNormalH, 'h', SOURCES.agentLibrary),
						input('Q', model === null ? null : model.q, '1', 'step renalFactor')
					]
				: [input('CrCl', args.crclMlMin, 'mL/min', 'step dosingCrcl'), input('Vd', model === null ? null : model.volumeBeforeAlbuminL, 'L', 'step volume')],
			MODEL_SOURCE[agent.model],
			model === null ? note : undefined
		)
	);
	if (highlyBound) {
		const alb = model === null ? null : model.albumin;
		trace.push(
			step(
				'albuminAdjustment',
				'Highly bound agent: CL and Vd at current albumin',
				alb === null ? null : alb.fuRatioApplied,
				'1',
				'fu ratio r = fu/fu_ref (applied only below Alb_ref, capped at 2); CL = CL_secreted + (CL_filtered + CL_nonrenal) × r with CL_filtered ≤ fu_ref × CrCl; Vd = Vp(1+R) + fu·(Ve − R·Vp) + Vt·r (Øie–Tozer; Vp 3 L, Ve 12 L per 70 kg, R 1.4)',
				[
					input('fu', args.fuNow, '1', 'step unboundFraction'),
					input('fu_ref', args.fuRef, '1', SOURCES.agentLibrary),
					input('fu ratio before cap', alb === null ? null : alb.fuRatio, '1', 'computed'),
					input('CL filtered', alb === null ? null : alb.filteredLPerH, 'L/h', 'computed'),
					input('CL secreted', alb === null ? null : alb.secretedLPerH, 'L/h', 'computed'),
					input('CL non-renal', alb === null ? null : alb.nonRenalLPerH, 'L/h', 'computed'),
					input('volume model', alb === null ? null : alb.volumeModel, '', 'computed'),
					input('cap', MAX_FU_RATIO, '1', SOURCES.commonPractice)
				],
				SOURCES.albuminModel,
				alb === null
					? (note ?? 'not applied')
					: 'total levels fall while unbound exposure is in theory unchanged; consider unbound-level TDM or extended infusion where available — no automatic dose increase'
			)
		);
	}
	const now = model === null ? null : model.snapshot;
	trace.push(
		step(
			'kNow',
			'Elimination rate constant',
			now === null ? null : now.kPerH,
			'/h',
			'k = CL / Vd',
			[
				input('CL', now === null ? null : now.clearanceLPerH, 'L/h', highlyBound ? 'step albuminAdjustment' : 'step clearance'),
				input('Vd', now === null ? null : now.volumeL, 'L', highlyBound ? 'step albuminAdjustment' : 'step volume')
			],
			SOURCES.oneCompartment,
			now === null ? note : undefined
		),
		step(
			'halfLifeNow',
			'Expected half-life',
			now === null ? null : now.halfLifeH,
			'h',
			't½ = ln2 / k',
			[input('k', now === null ? null : now.kPerH, '/h', 'step kNow')],
			SOURCES.oneCompartment,
			now === null ? note : undefined
		)
	);
	return trace;
}
