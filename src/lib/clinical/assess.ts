// assess(): the whole re-estimate for one order at one point in time, with its calculation trace.
// Pure and synchronous; numbers are never formatted here (the UI formats them). Each stage lives in its
// own module and is called once:
//   inputs and timeline (timeline.ts) → patient at a time (patient-state.ts, now and at the start in
//   start-state.ts) → renal function (renal-state.ts) → drug model (drug-model.ts) → exposure
//   (exposure.ts) → the regimen the order is held against (reference-regimen.ts) → proposal
//   (proposal.ts, checked by proposal-invariants.ts) → measured levels (measured.ts: the patient's own
//   kinetics, whose regimen replaces the population one) → cautions (cautions.ts).
import { completeAgent } from './agent-params';
import { DEFAULT_ALBUMIN_REF_G_L, HIGHLY_BOUND_THRESHOLD, unboundFractionRaw } from './albumin';
import { DEFAULT_OBESE_RATIO } from './body-size';
import { measuredStage } from './measured';
import { situationalCautions } from './cautions';
import { drugModel, drugModelTrace, type DrugModelResult } from './drug-model';
import { ClinicalInputError, requireDate, requireNonNegative, requirePositive, requireSex } from './errors';
import { NO_EXPOSURE, predictExposure, type Exposure } from './exposure';
import { ageAt, BASIS_LABEL, bodySizeAt, bodySizeTrace, weightForBasis } from './patient-state';
import { propose } from './proposal';
import { compareDose, isExtendedInfusion, selectReference, usualMaximumDailyMg, USUAL_MAX_MARGIN, type ReferenceResult } from './reference-regimen';
import { DEFAULT_BAND_TOLERANCE, DEFAULT_CRCL_NORMAL_ML_MIN } from './regimen';
import { renalState } from './renal-state';
import { stateAtStart } from './start-state';
import { creatinineSeries, HOUR_MS, latestAtOrBefore, renalReplacementAt, therapyDay } from './timeline';
import { utcYmd, ymdString } from './age';
import { input, PROPOSAL_CAUTION, SOURCES, step } from './trace';
import type { AssessInput, AssessSettings, Assessment, KineticsSnapshot, TherapyContext, TraceStep } from './types';

export { START_GRACE_H } from './start-state';
export { KINETIC_GFR_MIN_INTERVAL_H } from './renal-state';
export const DEFAULT_MAX_ALBUMIN_AGE_H = 168;

const EMPTY_SETTINGS: AssessSettings = {};

type Settings = {
	obeseRatio: number;
	crclNormalMlMin: number;
	bsaFormula: 'mosteller' | 'dubois';
	scrFloorMgDl: number | null;
	maxAlbuminAgeH: number;
	bandTolerance: number;
	kineticGfrMaxRiseMgDlPerDay: number | null;
	aucWindowMgHL: [number, number] | undefined;
};

function resolveSettings(s: AssessSettings): Settings {
	const obeseRatio = s.obeseRatio === undefined ? DEFAULT_OBESE_RATIO : requirePositive('settings.obeseRatio', s.obeseRatio);
	if (obeseRatio < 1) throw new ClinicalInputError('settings.obeseRatio', obeseRatio, 'must be ≥ 1');
	const bsaFormula = s.bsaFormula ?? 'mosteller';
	if (bsaFormula !== 'mosteller' && bsaFormula !== 'dubois') throw new ClinicalInputError('settings.bsaFormula', bsaFormula, "must be 'mosteller' or 'dubois'");
	return {
		obeseRatio,
		crclNormalMlMin: s.crclNormalMlMin === undefined ? DEFAULT_CRCL_NORMAL_ML_MIN : requirePositive('settings.crclNormalMlMin', s.crclNormalMlMin),
		bsaFormula,
		scrFloorMgDl: s.scrFloorMgDl === undefined || s.scrFloorMgDl === null ? null : requirePositive('settings.scrFloorMgDl', s.scrFloorMgDl),
		maxAlbuminAgeH: s.maxAlbuminAgeH === undefined ? DEFAULT_MAX_ALBUMIN_AGE_H : requirePositive('settings.maxAlbuminAgeH', s.maxAlbuminAgeH),
		bandTolerance: s.bandTolerance === undefined ? DEFAULT_BAND_TOLERANCE : requireNonNegative('settings.bandTolerance', s.bandTolerance),
		kineticGfrMaxRiseMgDlPerDay:
			s.kineticGfrMaxRiseMgDlPerDay === undefined || s.kineticGfrMaxRiseMgDlPerDay === null
				? null
				: requirePositive('settings.kineticGfrMaxRiseMgDlPerDay', s.kineticGfrMaxRiseMgDlPerDay),
		aucWindowMgHL: aucWindow(s.aucWindowMgHL)
	};
}

function aucWindow(w: [number, number] | undefined): [number, number] | undefined {
	if (w === undefined) return undefined;
	if (!Array.isArray(w) || w.length !== 2 || !(w[0] > 0 && w[1] > w[0]))
		throw new ClinicalInputError('settings.aucWindowMgHL', w, 'must be [low, high] with 0 < low < high');
	return w;
}

export function assess(inputArg: AssessInput): Assessment {
	// ── Inputs ─────────────────────────────────────────────────────────────────────────────────────
	const atMs = requireDate('at', inputArg.at);
	const at = inputArg.at;
	const agent = completeAgent(inputArg.agent);
	const order = inputArg.order;
	if (order == null || typeof order !== 'object') throw new ClinicalInputError('order', order, 'must be an object');
	const orderDoseMg = requirePositive('order.doseMg', order.doseMg);
	const orderIntervalH = requirePositive('order.intervalH', order.intervalH);
	const orderInfusionH = requireNonNegative('order.infusionH', order.infusionH);
	if (orderInfusionH > orderIntervalH) throw new ClinicalInputError('order.infusionH', orderInfusionH, 'must not exceed order.intervalH');
	if (order.route !== 'iv' && order.route !== 'po' && order.route !== 'im')
		throw new ClinicalInputError('order.route', order.route, "must be 'iv', 'po' or 'im'");
	const startMs = requireDate('order.startAt', order.startAt);
	if (order.firstDoseAt != null) requireDate('order.firstDoseAt', order.firstDoseAt);
	if (order.restartAt != null) requireDate('order.restartAt', order.restartAt);
	const patient = inputArg.patient;
	if (patient == null || typeof patient !== 'object') throw new ClinicalInputError('patient', patient, 'must be an object');
	const sex = requireSex('patient.sex', patient.sex);
	const female = sex === 'female';
	const rawSettings = inputArg.settings ?? EMPTY_SETTINGS;
	const settings = resolveSettings(rawSettings);
	const bodySettings = { obeseRatio: settings.obeseRatio, bsaFormula: settings.bsaFormula };
	const trace: TraceStep[] = [];
	const missing: string[] = [];

	// ── Patient now ────────────────────────────────────────────────────────────────────────────────
	// a database row may carry null for an unknown birth date: treat it as absent
	const birthMs = patient.birthDate == null ? null : requireDate('patient.birthDate', patient.birthDate);
	const ageYears = ageAt(patient, birthMs, atMs);
	trace.push(
		birthMs !== null
			? step(
					'age',
					'Age',
					ageYears,
					'a',
					'completed years from birth date to assessment time',
					[input('birth date', ymdString(utcYmd(birthMs)), '', SOURCES.record)],
					SOURCES.commonPractice
				)
			: step('age', 'Age', ageYears, 'a', 'age as recorded', [input('ageYears', ageYears, 'a', SOURCES.record)], SOURCES.record)
	);
	const body = bodySizeAt(patient, female, atMs, bodySettings);
	if (body.heightCm === null) missing.push('height');
	if (body.weightKg === null) missing.push('weight');
	trace.push(...bodySizeTrace(body, sex, { ...bodySettings, obeseRatioFromSettings: rawSettings.obeseRatio !== undefined }));

	// ── Renal function ─────────────────────────────────────────────────────────────────────────────
	const series = creatinineSeries(inputArg.creatinine ?? [], atMs);
	const renal = renalState({
		atMs,
		series,
		ageYears,
		sex,
		body,
		maxCreatinineAgeH: agent.maxCreatinineAgeH,
		scrFloorMgDl: settings.scrFloorMgDl,
		scrFloorFromSettings: rawSettings.scrFloorMgDl != null,
		kineticGfrMaxRiseMgDlPerDay: settings.kineticGfrMaxRiseMgDlPerDay,
		renalReplacement: renalReplacementAt(patient.renalReplacement, atMs)
	});
	missing.push(...renal.missing);
	trace.push(...renal.trace);

	// ── Albumin ────────────────────────────────────────────────────────────────────────────────────
	const albuminList = inputArg.albumin ?? [];
	const albuminRow = latestAtOrBefore(albuminList, atMs, 'albumin');
	const albuminGL = albuminRow === null ? null : requirePositive('albumin.gL', albuminRow.gL);
	const albuminAgeH = albuminRow === null ? null : (atMs - albuminRow.at.getTime()) / HOUR_MS;
	const albuminFresh = albuminAgeH !== null && albuminAgeH <= settings.maxAlbuminAgeH;
	if (albuminRow === null) missing.push('albumin');
	else if (!albuminFresh) missing.push(`albumin older than ${settings.maxAlbuminAgeH} h`);
	const fuRef = 1 - agent.proteinBinding;
	const albuminRefGL = agent.albuminRefGL ?? DEFAULT_ALBUMIN_REF_G_L;
	const fuNow = albuminFresh ? unboundFractionRaw(fuRef, albuminRefGL, albuminGL as number) : null;
	const highlyBound = agent.proteinBinding >= HIGHLY_BOUND_THRESHOLD;
	trace.push(
		step(
			'unboundFraction',
			'Unbound fraction at current albumin',
			fuNow,
			'1',
			'fu = 1 / (1 + ((1 − fu_ref)/fu_ref) × Alb / Alb_ref)',
			[
				input('fu_ref (1 − protein binding)', fuRef, '1', SOURCES.agentLibrary),
				input('Alb_ref', albuminRefGL, 'g/L', SOURCES.agentLibrary),
				input('albumin', albuminGL, 'g/L', 'latest albumin result'),
				input('age of result', albuminAgeH, 'h', 'result time')
			],
			SOURCES.unboundFraction,
			albuminRow === null ? 'no albumin result' : albuminFresh ? undefined : 'albumin result too old'
		)
	);

	// ── The order's route and day of therapy ───────────────────────────────────────────────────────
	const dailyDoseMg = (orderDoseMg * 24) / orderIntervalH;
	const vdWeightKg = weightForBasis(agent.vdWeightBasis, body);
	const day = therapyDay(order, atMs);
	const reference: ReferenceResult = selectReference({
		agent,
		route: order.route,
		dosingCrclMlMin: renal.dosingCrclMlMin,
		renalReplacement: renal.renalReplacement,
		dayOfTherapy: day.dayOfTherapy,
		weightKg: vdWeightKg,
		orderDailyDoseMg: dailyDoseMg,
		orderInfusionH
	});
	const routeParams = reference.routeParams;
	const systemic = routeParams !== null && routeParams.systemic;
	const bioavailability = routeParams === null ? (order.route === 'po' ? agent.bioavailability : 1) : routeParams.bioavailability;
	const therapy: TherapyContext = {
		route: order.route,
		systemic,
		bioavailability,
		dayOfTherapy: day.dayOfTherapy,
		dosesGiven: day.dosesGiven,
		newOrder: day.newOrder,
		restarted: day.restarted,
		extendedInfusion: isExtendedInfusion(agent, orderInfusionH)
	};
	trace.push(
		step(
			'therapy',
			'Route and day of therapy',
			`${order.route.toUpperCase()}, day ${day.dayOfTherapy}, dose ${day.dosesGiven}`,
			'',
			'day 1 = the first 24 h from the first dose; doses given on schedule since then',
			[
				input('first dose', (order.firstDoseAt ?? order.startAt).toISOString(), '', 'order'),
				input('interval', orderIntervalH, 'h', 'order'),
				input('bioavailability', bioavailability, '1', SOURCES.agentLibrary),
				input('absorbed by this route', systemic, '', SOURCES.agentLibrary)
			],
			SOURCES.commonPractice,
			!systemic ? (reference.reason ?? 'not absorbed by this route') : therapy.extendedInfusion ? 'extended or continuous infusion' : undefined
		)
	);

	// ── Drug kinetics now (at the CrCl dosing uses) ────────────────────────────────────────────────
	const albuminBlocks = highlyBound && !albuminFresh;
	const kineticsNote = !systemic
		? 'not computed: not absorbed by this route'
		: renal.renalReplacement !== null
			? 'not computed: on renal replacement therapy, clearance depends on the dialysis schedule'
			: renal.dosingCrclMlMin === null
				? 'not computed: no CrCl'
				: vdWeightKg === null
					? 'not computed: no weight'
					: albuminBlocks
						? 'not computed: highly bound agent without a current albumin'
						: undefined;
	let nowModel: DrugModelResult | null = null;
	if (kineticsNote === undefined) {
		nowModel = drugModel(agent, renal.dosingCrclMlMin as number, vdWeightKg as number, settings.crclNormalMlMin, renal.arc, fuRef, fuNow);
	}
	const now: KineticsSnapshot | null = nowModel === null ? null : nowModel.snapshot;
	const vdWeightSource =
		vdWeightKg !== null && body.heightCm === null && agent.vdWeightBasis !== 'actual'
			? 'actual weight (no height: ' + BASIS_LABEL[agent.vdWeightBasis] + ' unknown)'
			: BASIS_LABEL[agent.vdWeightBasis];
	trace.push(
		...drugModelTrace({
			agent,
			model: nowModel,
			crclMlMin: renal.dosingCrclMlMin,
			crclNormalMlMin: settings.crclNormalMlMin,
			crclNormalFromSettings: rawSettings.crclNormalMlMin !== undefined,
			arc: renal.arc,
			vdWeightKg,
			vdWeightSource,
			fuNow,
			fuRef,
			note: kineticsNote
		})
	);

	// ── At the order's start ───────────────────────────────────────────────────────────────────────
	const start = stateAtStart({
		input: inputArg,
		agent,
		atMs,
		startMs,
		birthMs,
		ageNowYears: ageYears,
		female,
		series,
		bodySettings,
		scrFloorMgDl: settings.scrFloorMgDl,
		crclNormalMlMin: settings.crclNormalMlMin,
		maxAlbuminAgeH: settings.maxAlbuminAgeH,
		fuRef,
		albuminRefGL,
		albuminNowKnown: albuminRow !== null
	});
	missing.push(...start.missing);
	const atStart = start.model === null ? null : start.model.snapshot;
	const halfLifeRatio = now !== null && atStart !== null ? now.halfLifeH / atStart.halfLifeH : null;
	const halfLifeRatioRenal =
		nowModel !== null && start.model !== null ? nowModel.atReferenceAlbumin.halfLifeH / start.model.atReferenceAlbumin.halfLifeH : null;
	trace.push(
		step(
			'crclAtStart',
			'CrCl at the order start (Cockcroft–Gault)',
			start.crclMlMin,
			'mL/min',
			'Cockcroft–Gault with the creatinine, weight and age in effect at the order start',
			[input('SCr at start', start.creatinineMgDl, 'mg/dL', 'latest at or before the start, else first within 24 h after')],
			SOURCES.cockcroftGault,
			start.note
		),
		step(
			'halfLifeAtStart',
			'Half-life at the order start',
			atStart === null ? null : atStart.halfLifeH,
			'h',
			'same drug model as now, with the values in effect at the order start',
			[
				input('CL at start', atStart === null ? null : atStart.clearanceLPerH, 'L/h', 'drug model'),
				input('Vd at start', atStart === null ? null : atStart.volumeL, 'L', 'drug model')
			],
			SOURCES.oneCompartment,
			start.note
		),
		step(
			'halfLifeRatio',
			'Half-life now / at start',
			halfLifeRatio,
			'1',
			't½_now / t½_start',
			[
				input('t½ now', now === null ? null : now.halfLifeH, 'h', 'step halfLifeNow'),
				input('t½ at start', atStart === null ? null : atStart.halfLifeH, 'h', 'step halfLifeAtStart'),
				input('ratio from renal function alone (reference albumin)', halfLifeRatioRenal, '1', 'drug model')
			],
			SOURCES.commonPractice
		)
	);

	// ── Exposure of the current regimen ────────────────────────────────────────────────────────────
	const iv = order.route === 'iv';
	let exposure: Exposure = NO_EXPOSURE;
	let exposureNote: string | undefined = kineticsNote;
	if (now !== null) {
		exposure = predictExposure({ doseMg: orderDoseMg, intervalH: orderIntervalH, infusionH: orderInfusionH }, now, bioavailability, iv);
		if (!iv) exposureNote = 'oral/IM route: absorption not modelled, so no peak or trough';
	}
	trace.push(
		step(
			'peak',
			'Predicted steady-state peak (end of infusion)',
			exposure.peakMgL,
			'mg/L',
			'Cmax,ss = k0 (1 − e^(−k·tinf)) / (k·Vd·(1 − e^(−kτ))), k0 = dose / tinf',
			[
				input('dose', orderDoseMg, 'mg', 'order'),
				input('tinf', orderInfusionH, 'h', 'order'),
				input('τ', orderIntervalH, 'h', 'order'),
				input('Vd', now === null ? null : now.volumeL, 'L', 'drug model'),
				input('k', now === null ? null : now.kPerH, '/h', 'step kNow')
			],
			SOURCES.sawchukZaske,
			exposureNote
		),
		step(
			'trough',
			'Predicted steady-state trough',
			exposure.troughMgL,
			'mg/L',
			'Cmin,ss = Cmax,ss × e^(−k(τ − tinf))',
			[input('Cmax,ss', exposure.peakMgL, 'mg/L', 'step peak'), input('trough limit', agent.troughMaxMgL, 'mg/L', SOURCES.agentLibrary)],
			SOURCES.sawchukZaske,
			exposureNote
		),
		step(
			'auc24',
			'Predicted steady-state AUC over 24 h',
			exposure.auc24MgHL,
			'mg.h/L',
			'AUC24 = F × daily dose / CL',
			[
				input('daily dose', dailyDoseMg, 'mg', 'order'),
				input('F', bioavailability, '1', iv ? 'IV' : SOURCES.agentLibrary),
				input('CL', now === null ? null : now.clearanceLPerH, 'L/h', 'drug model'),
				input('AUC target low', agent.aucTargetMgHL === null ? null : agent.aucTargetMgHL[0], 'mg.h/L', SOURCES.agentLibrary),
				input('AUC target high', agent.aucTargetMgHL === null ? null : agent.aucTargetMgHL[1], 'mg.h/L', SOURCES.agentLibrary)
			],
			agent.aucTargetMgHL === null ? SOURCES.oneCompartment : SOURCES.aucTarget,
			exposure.auc24MgHL === null ? exposureNote : undefined
		)
	);

	// ── The regimen the order is held against ──────────────────────────────────────────────────────
	const ref = reference.reference;
	const comparison = compareDose({
		agent,
		orderDailyDoseMg: dailyDoseMg,
		orderInfusionH,
		referenceDailyDoseMg: ref?.dailyDoseMg ?? null,
		tolerance: settings.bandTolerance
	});
	const usualMaxDailyDoseMg = systemic ? usualMaximumDailyMg(agent, routeParams, vdWeightKg, ref) : null;
	const noRegimenReason = systemic && (ref === null || (ref.dailyDoseMg === null && !ref.aucGuided)) ? reference.reason : null;
	trace.push(
		step(
			'band',
			'Regimen the order is held against',
			ref === null ? null : ref.label,
			'',
			'on dialysis or CRRT the library’s regimen for it; otherwise the band holding today’s dosing CrCl, of the default regimen or of the indication the order’s dose matches',
			[
				input('dosing CrCl', renal.dosingCrclMlMin, 'mL/min', 'step dosingCrcl'),
				input('daily dose of that regimen', ref?.dailyDoseMg ?? null, 'mg/d', SOURCES.agentLibrary)
			],
			SOURCES.agentLibrary,
			ref === null
				? (reference.reason ?? undefined)
				: [ref.note, ref.unadjusted ? 'the agent’s full regimen: no renal reduction here' : null, reference.reason].filter(Boolean).join('; ') || undefined
		),
		step(
			'comparedToBand',
			'Current daily dose against that regimen',
			comparison.compared,
			'',
			'within when the ratio lies in [1/(1+tol), 1+tol]; an extended or continuous infusion counts as within from the library’s fraction of the daily dose',
			[
				input('order daily dose', dailyDoseMg, 'mg/d', 'order'),
				input('regimen daily dose', ref?.dailyDoseMg ?? null, 'mg/d', 'step band'),
				input('tolerance', settings.bandTolerance, '1', rawSettings.bandTolerance === undefined ? 'default' : 'settings'),
				input('usual maximum daily dose', usualMaxDailyDoseMg, 'mg/d', SOURCES.agentLibrary)
			],
			SOURCES.commonPractice,
			usualMaxDailyDoseMg !== null && dailyDoseMg > usualMaxDailyDoseMg * USUAL_MAX_MARGIN
				? 'above the usual maximum daily dose: check the indication'
				: undefined
		)
	);

	// ── Proposal ───────────────────────────────────────────────────────────────────────────────────
	const proposal = propose({
		agent,
		route: order.route,
		therapy,
		reference: ref,
		referenceReason: reference.reason,
		dosingBasis: renal.dosingBasis,
		kinetics: now,
		kineticsNote,
		weightKg: vdWeightKg,
		order: { doseMg: orderDoseMg, intervalH: orderIntervalH, infusionH: orderInfusionH, dailyDoseMg },
		orderExposure: exposure,
		comparedToReference: comparison.compared,
		tolerance: settings.bandTolerance
	});
	// ── Measured levels: the patient's own kinetics; their regimen replaces the population one ───────
	const levels = measuredStage({
		input: inputArg,
		agent,
		at,
		order: { doseMg: orderDoseMg, intervalH: orderIntervalH, infusionH: orderInfusionH },
		crclMlMin: renal.crclMlMin,
		totalWeightKg: body.weightKg,
		vdWeightKg,
		renalReplacement: renal.renalReplacement,
		population: now,
		aucWindowMgHL: settings.aucWindowMgHL
	});
	if (levels !== null) trace.push(...levels.trace);
	const fromLevels = levels !== null && levels.measured.individual !== null;
	const proposed = fromLevels ? levels.measured.proposed : proposal.proposed;
	const proposalReason = fromLevels ? levels.measured.proposalReason : proposal.reason;
	const cautions = situationalCautions({ agent, therapy, body, renal, reference: ref, proposed });
	trace.push(
		step(
			'proposed',
			'Proposed regimen',
			proposed === null ? null : proposed.basis,
			'',
			'the library’s regimen (band, indication or dialysis) as stated, mg/kg doses to the agent’s step; AUC-guided agents from the AUC24 target; infusion within the maximum rate; checked against the agent’s limits',
			[
				input('dose', proposed === null ? null : proposed.doseMg, 'mg', 'proposal'),
				input('interval', proposed === null ? null : proposed.intervalH, 'h', 'proposal'),
				input('infusion', proposed === null ? null : proposed.infusionH, 'h', 'proposal'),
				input('predicted trough', proposed?.predicted?.troughMgL ?? null, 'mg/L', 'proposal'),
				input('predicted AUC24', proposed?.predicted?.auc24MgHL ?? null, 'mg.h/L', 'proposal')
			],
			ref !== null && ref.aucGuided ? SOURCES.aucTarget : SOURCES.agentLibrary,
			proposed === null
				? 'no proposal: ' + proposalReason
				: fromLevels
					? `from the individual kinetics of the measured levels (step levelProposal); ${PROPOSAL_CAUTION}`
					: PROPOSAL_CAUTION
		)
	);
	if (agent.loadingTargetMgL !== null) {
		trace.push(
			step(
				'loadingDose',
				'Loading dose to consider',
				proposed === null ? null : proposed.loadingDoseMg,
				'mg',
				'LD = Vd × C_target (÷ F if not IV), within the library’s mg/kg window and cap, rounded to the agent’s step; new orders and documented restarts only',
				[
					input('Vd', now === null ? null : now.volumeL, 'L', 'drug model'),
					input('C_target', agent.loadingTargetMgL, 'mg/L', SOURCES.agentLibrary),
					input(
						'window',
						agent.loadingMinMgPerKg === null ? null : `${agent.loadingMinMgPerKg}–${agent.loadingMaxMgPerKg} mg/kg, at most ${agent.loadingMaxMg} mg`,
						'',
						SOURCES.agentLibrary
					),
					input('F', bioavailability, '1', iv ? 'IV' : SOURCES.agentLibrary)
				],
				agent.loadingMinMgPerKg === null ? SOURCES.oneCompartment : SOURCES.aucTarget,
				proposed === null ? 'no proposal' : (proposal.loadingNote ?? (proposed.loadingDoseMg ? 'a suggestion to consider at the start of therapy' : undefined))
			)
		);
	}

	return {
		at,
		complete: missing.length === 0,
		missing,
		covariates: {
			ageYears,
			heightCm: body.heightCm,
			weightKg: body.weightKg,
			idealBodyWeightKg: body.idealKg,
			adjustedBodyWeightKg: body.adjustedKg,
			dosingWeightKg: body.dosingKg,
			weightBasis: body.weightBasis,
			bsaM2: body.bsaM2
		},
		creatinine: {
			latestMgDl: renal.latestMgDl,
			latestAt: renal.latestAtMs === null ? null : new Date(renal.latestAtMs),
			ageH: renal.ageH,
			baselineMgDl: renal.scan === null ? null : renal.scan.baselineMgDl,
			riseWithin48hMgDl: renal.scan === null ? null : renal.scan.riseWithin48hMgDl,
			fallWithin48hMgDl: renal.scan === null ? null : renal.scan.fallWithin48hMgDl,
			stable: renal.stable
		},
		renal: {
			crclMlMin: renal.crclMlMin,
			crclAtStartMlMin: start.crclMlMin,
			egfrIndexed: renal.egfrIndexed,
			egfrMlMin: renal.egfrMlMin,
			kineticGfrMlMin: renal.kineticGfrMlMin,
			kdigoStage: renal.kdigoStage,
			arc: renal.arc,
			dosingCrclMlMin: renal.dosingCrclMlMin,
			dosingBasis: renal.dosingBasis,
			renalReplacement: renal.renalReplacement
		},
		albumin: {
			latestGL: albuminGL,
			latestAt: albuminRow === null ? null : albuminRow.at,
			unboundFraction: fuNow,
			unboundFractionRef: fuRef
		},
		kinetics: {
			now,
			atStart,
			halfLifeRatio,
			halfLifeRatioRenal,
			peakMgL: exposure.peakMgL,
			troughMgL: exposure.troughMgL,
			auc24MgHL: exposure.auc24MgHL
		},
		therapy,
		dosing: {
			dailyDoseMg,
			band: null,
			bandDailyDoseMg: ref?.dailyDoseMg ?? null,
			comparedToBand: comparison.compared,
			referenceLabel: ref?.label ?? null,
			referenceUnadjusted: ref?.unadjusted ?? false,
			noRegimenReason,
			usualMaxDailyDoseMg,
			proposed,
			proposalReason,
			cautions,
			...(fromLevels ? { fromLevels: true } : {})
		},
		...(levels !== null ? { measured: levels.measured } : {}),
		trace
	};
}
