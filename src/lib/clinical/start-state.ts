// The patient and the drug at the order's start: the same body-size, Cockcroft–Gault and drug-model
// code as "now", with the values in effect then, so the half-life ratio compares like with like.
import { HIGHLY_BOUND_THRESHOLD, unboundFractionRaw } from './albumin';
import { completedYearsRaw } from './age';
import { drugModel, type DrugModelResult } from './drug-model';
import { requirePositive } from './errors';
import { bodySize, weightForBasis, type BodySizeSettings } from './patient-state';
import { ARC_THRESHOLD_ML_MIN, cockcroftGaultRaw } from './renal-function';
import { earliestWithin, HOUR_MS, latestAtOrBefore, renalReplacementAt, type CreatinineSeries } from './timeline';
import type { AgentParams, AssessInput } from './types';

/** how long after the order start a first result may stand in for the value at the start (common practice) */
export const START_GRACE_H = 24;

export type StartState = {
	crclMlMin: number | null;
	creatinineMgDl: number | null;
	model: DrugModelResult | null;
	note: string | undefined;
	missing: string[];
};

export function stateAtStart(args: {
	input: AssessInput;
	agent: AgentParams;
	atMs: number;
	startMs: number;
	birthMs: number | null;
	ageNowYears: number;
	female: boolean;
	series: CreatinineSeries;
	bodySettings: BodySizeSettings;
	scrFloorMgDl: number | null;
	crclNormalMlMin: number;
	maxAlbuminAgeH: number;
	fuRef: number;
	albuminRefGL: number;
	albuminNowKnown: boolean;
}): StartState {
	const { input, agent, series } = args;
	const times = series.timesMs;
	const values = series.valuesMgDl;
	const n = times.length;
	const startRefMs = args.startMs < args.atMs ? args.startMs : args.atMs;
	const missing: string[] = [];
	const none = (note: string): StartState => ({ crclMlMin: null, creatinineMgDl: null, model: null, note, missing });

	if (renalReplacementAt(input.patient.renalReplacement, startRefMs) !== null) return none('on renal replacement therapy at the order start');
	// creatinine in effect at the start: latest at or before it, else the first within 24 h after it
	let idx = -1;
	for (let i = n - 1; i >= 0; i--) {
		if (times[i] <= startRefMs) {
			idx = i;
			break;
		}
	}
	if (idx >= 0 && (startRefMs - times[idx]) / HOUR_MS > agent.maxCreatinineAgeH) idx = -1;
	if (idx < 0) {
		for (let i = 0; i < n; i++) {
			if (times[i] > startRefMs) {
				if (times[i] - startRefMs <= START_GRACE_H * HOUR_MS) idx = i;
				break;
			}
		}
	}
	if (idx < 0) {
		// with no creatinine at all, "creatinine" is already listed
		if (n > 0) missing.push('creatinine at order start');
		return none('no creatinine in effect at the order start');
	}
	const creatinineMgDl = values[idx];
	const patient = input.patient;
	const weightRow =
		latestAtOrBefore(patient.weights ?? [], startRefMs, 'patient.weights') ?? latestAtOrBefore(patient.weights ?? [], args.atMs, 'patient.weights');
	const heightRow =
		latestAtOrBefore(patient.heights ?? [], startRefMs, 'patient.heights') ?? latestAtOrBefore(patient.heights ?? [], args.atMs, 'patient.heights');
	const startAge = args.birthMs !== null ? completedYearsRaw(args.birthMs, startRefMs) : args.ageNowYears;
	if (weightRow === null) return { ...none('no weight at the order start'), creatinineMgDl };
	if (startAge < 18) return { ...none('patient under 18 at the order start'), creatinineMgDl };
	let body;
	try {
		body = bodySize(
			heightRow === null ? null : requirePositive('patient.heights.cm', heightRow.cm),
			requirePositive('patient.weights.kg', weightRow.kg),
			args.female,
			args.bodySettings
		);
	} catch {
		// an unusable height then: the actual weight stands in, as when no height is known
		body = bodySize(null, weightRow.kg, args.female, args.bodySettings);
	}
	const scr = args.scrFloorMgDl !== null && creatinineMgDl < args.scrFloorMgDl ? args.scrFloorMgDl : creatinineMgDl;
	const crclMlMin = cockcroftGaultRaw(startAge, args.female, body.dosingKg as number, scr);
	let fuStart: number | null = null;
	const albumin = input.albumin ?? [];
	if (agent.proteinBinding >= HIGHLY_BOUND_THRESHOLD) {
		const row =
			latestAtOrBefore(albumin, startRefMs, 'albumin') ?? earliestWithin(albumin, startRefMs, Math.min(args.atMs, startRefMs + START_GRACE_H * HOUR_MS));
		if (row === null || (startRefMs - row.at.getTime()) / HOUR_MS > args.maxAlbuminAgeH) {
			if (args.albuminNowKnown) missing.push('albumin at order start');
			return { crclMlMin, creatinineMgDl, model: null, note: 'highly bound agent without an albumin at the order start', missing };
		}
		fuStart = unboundFractionRaw(args.fuRef, args.albuminRefGL, requirePositive('albumin.gL', row.gL));
	}
	const vdWeightKg = weightForBasis(agent.vdWeightBasis, body) as number;
	const model = drugModel(agent, crclMlMin, vdWeightKg, args.crclNormalMlMin, crclMlMin >= ARC_THRESHOLD_ML_MIN, args.fuRef, fuStart);
	return { crclMlMin, creatinineMgDl, model, note: undefined, missing };
}
