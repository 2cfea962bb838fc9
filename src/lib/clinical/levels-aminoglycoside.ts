// Aminoglycosides from two measured levels after one dose (Sawchuk–Zaske method; Sawchuk RJ, Zaske DE,
// J Pharmacokinet Biopharm 1976;4:183–195, citation from memory; equations as in clinical-reference F12):
//   k = ln(C1 / C2) / (t2 − t1)                          log-linear slope between the two levels
//   t½ = ln2 / k
//   Cmax = C1 · e^(k (t1 − t_end))                       true peak at the end of the infusion
//   Cmin = C2 · e^(−k (t_next − t2))                      true trough before the next dose
//   Vd = k0 (1 − e^(−k t')) / (k (Cmax − C0 e^(−k t')))   infusion form, C0 = concentration when the dose began
//   CL = k · Vd
// and a regimen to the agent's peak/trough targets: τ = t' + ln(Cpeak / Ctrough) / k, rounded up to a practical
// interval, dose = Cpeak k Vd (1 − e^(−kτ)) t' / (1 − e^(−k t')) rounded to the agent's dose step (textbook
// intermittent-infusion equations, e.g. Bauer LA, Applied Clinical Pharmacokinetics, chapter on the
// aminoglycosides). Intravenous doses only.
// Extended-interval dosing (every 24 h or longer) of an agent whose library entry says so
// (singleLevelExtendedInterval) may be read from one level after the dose: the volume is then the
// population's and k the rate at which the doses given reach that level (no nomogram: the superposition of
// the doses actually given, so any dose and any sampling time are read the same way).
import { buildDosingHistory, concentrationAtMs, infusionRunningAt, singleDoseConcentration } from './dosing-history';
import { requireDate, requirePositive } from './errors';
import { predictExposure } from './exposure';
import type {
	AminoglycosideLevels,
	AminoglycosideLevelsInput,
	AminoglycosideTargets,
	DosingHistory,
	DrugLevel,
	ExcludedLevel,
	HistoryDose,
	LevelProposal
} from './levels-types';
import { checkLevels, levelReference, runningIvTherapy } from './levels-vancomycin';
import { roundToStepMg } from './proposal';
import { proposalViolations } from './proposal-invariants';
import { PRACTICAL_INTERVALS_H } from './regimen';
import { HOUR_MS } from './timeline';
import { input, SOURCES, step } from './trace';
import type { AgentParams, KineticsSnapshot, ProposedRegimen, TraceStep } from './types';

const endMsOf = (d: HistoryDose) => d.startMs + d.durationH * HOUR_MS;

/** an interval this long or longer is extended-interval dosing (once daily or less often) */
export const EXTENDED_INTERVAL_MIN_H = 24;
/** the range searched for k from one level, /h (t½ from about 7 min to about 29 days) */
const K_MIN_PER_H = 0.001;
const K_MAX_PER_H = 6;
const SINGLE_LEVEL_FORMULA = 'k such that Σ doses given (one compartment, Vd population) = C at the level’s time; Vd = Vd/kg × weight';
const fmt = (n: number, digits = 2) => n.toFixed(digits);

/** The usual maximum daily dose for this patient, mg (agent library), or null. */
function usualMaxDailyMg(agent: AgentParams, weightKg: number | null): number | null {
	if (agent.usualMaxDailyDoseMg != null) return agent.usualMaxDailyDoseMg;
	if (agent.usualMaxDailyDoseMgPerKg != null && weightKg !== null) return agent.usualMaxDailyDoseMgPerKg * weightKg;
	return null;
}

/**
 * Maintenance dose giving a steady-state peak `peakMgL` at the end of a `infusionH` infusion every `intervalH`:
 * k0 = Cmax k V (1 − e^(−kτ)) / (1 − e^(−k t')), dose = k0 t' (bolus limit: Cmax V (1 − e^(−kτ))).
 */
export function doseForPeakMg(peakMgL: number, k: KineticsSnapshot, intervalH: number, infusionH: number): number {
	const x = k.kPerH * infusionH;
	const perInfusion = x < 1e-9 ? 1 : -Math.expm1(-x) / x;
	return (peakMgL * k.volumeL * -Math.expm1(-k.kPerH * intervalH)) / perInfusion;
}

function proposeToTargets(
	agent: AgentParams,
	kinetics: KineticsSnapshot,
	targets: AminoglycosideTargets,
	weightKg: number | null,
	therapy: ReturnType<typeof runningIvTherapy>,
	orderInfusionH: number
): LevelProposal {
	// the order's infusion time (what the ward gives), or the agent's usual one for a bolus order
	const infusionH = orderInfusionH > 0 ? orderInfusionH : agent.usualInfusionH;
	const neededH = infusionH + Math.log(targets.peakMgL / targets.troughMgL) / kinetics.kPerH;
	const candidates = PRACTICAL_INTERVALS_H.filter((tau) => tau >= neededH - 1e-9 && tau >= infusionH);
	if (candidates.length === 0) {
		return {
			proposed: null,
			reason: `level-guided: at k ${fmt(kinetics.kPerH, 3)}/h the trough limit of ${targets.troughMgL} mg/L needs an interval of ${fmt(neededH, 0)} h, beyond ${PRACTICAL_INTERVALS_H[PRACTICAL_INTERVALS_H.length - 1]} h; redose when a level is below the limit`
		};
	}
	const maxDaily = usualMaxDailyMg(agent, weightKg);
	const reference = levelReference(false, 'peak/trough targets from measured levels');
	const reasons: string[] = [];
	for (const intervalH of candidates) {
		const exact = doseForPeakMg(targets.peakMgL, kinetics, intervalH, infusionH);
		let doseMg = roundToStepMg(exact, agent.doseStepMg, agent.maxDoseMg);
		let predicted = predictExposure({ doseMg, intervalH, infusionH }, kinetics, 1, true);
		// rounding up may lift the trough over the limit: one step down keeps the peak close to its target
		if ((predicted.troughMgL as number) > targets.troughMgL && doseMg > agent.doseStepMg) {
			doseMg -= agent.doseStepMg;
			predicted = predictExposure({ doseMg, intervalH, infusionH }, kinetics, 1, true);
		}
		if ((predicted.troughMgL as number) > targets.troughMgL) {
			reasons.push(`q${intervalH}h: predicted trough ${fmt(predicted.troughMgL as number)} mg/L above ${targets.troughMgL}`);
			continue;
		}
		const dailyMg = (doseMg * 24) / intervalH;
		if (maxDaily !== null && dailyMg > maxDaily * 1.005) {
			reasons.push(`q${intervalH}h: ${Math.round(dailyMg)} mg/day above the usual maximum of ${Math.round(maxDaily)} mg/day`);
			continue;
		}
		const proposed: ProposedRegimen = {
			doseMg,
			intervalH,
			infusionH,
			loadingDoseMg: null,
			basis: `peak ${targets.peakMgL} mg/L and trough ≤ ${targets.troughMgL} mg/L from the patient's own k ${fmt(kinetics.kPerH, 3)}/h and Vd ${fmt(kinetics.volumeL, 1)} L (Sawchuk–Zaske); infused over ${infusionH} h; interval rounded up to a practical one, dose rounded to the ${agent.doseStepMg}-mg step`,
			predicted
		};
		const violations = proposalViolations(
			{ agent: { ...agent, troughMaxMgL: Math.min(targets.troughMgL, agent.troughMaxMgL ?? Infinity) }, route: 'iv', reference, therapy, kinetics, weightKg },
			proposed
		);
		if (violations.length > 0) {
			reasons.push(`q${intervalH}h: ${violations.join('; ')}`);
			continue;
		}
		return { proposed, reason: null };
	}
	return { proposed: null, reason: `no practical regimen meets the targets: ${reasons.join('; ')}` };
}

/** Levels at impossible times for this method, or null. */
function screen(level: DrugLevel, tMs: number, atMs: number, doses: readonly HistoryDose[]): string | null {
	if (!(level.mgL > 0)) return 'not a positive concentration (a level below the limit of quantification is not used)';
	if (tMs > atMs) return 'drawn after the assessment time';
	if (doses.length === 0 || tMs <= doses[0].startMs) return 'drawn before the first dose';
	const running = infusionRunningAt(doses, tMs);
	if (running === null) return null;
	return level.timing === 'trough'
		? `labelled trough but drawn during the infusion started ${new Date(running.startMs).toISOString()}`
		: 'drawn during an infusion: the two-level method uses levels after the end of the infusion';
}

/**
 * Individual aminoglycoside kinetics from two levels drawn after the same dose (and a pre-dose level when one
 * was drawn), with a regimen to the agent's peak/trough targets or the reason there is none.
 */
export function aminoglycosideTwoLevels(args: AminoglycosideLevelsInput): AminoglycosideLevels {
	const atMs = requireDate('at', args.at);
	const agent = args.agent;
	checkLevels(args.levels);
	const weightKg = args.weightKg == null ? null : requirePositive('weightKg', args.weightKg);
	const history = buildDosingHistory({ at: args.at, administrations: args.administrations, schedule: args.schedule });
	const doses = history.doses;
	const trace: TraceStep[] = [...history.trace];
	const excluded: ExcludedLevel[] = [];
	const ok: { level: DrugLevel; tMs: number }[] = [];
	for (const level of [...args.levels].sort((a, b) => a.at.getTime() - b.at.getTime())) {
		const reason = screen(level, level.at.getTime(), atMs, doses);
		if (reason !== null) excluded.push({ level, reason });
		else ok.push({ level, tMs: level.at.getTime() });
	}
	const peakTarget = args.targets?.peakMgL ?? agent.peakTargetMgL ?? null;
	const troughTarget = args.targets?.troughMgL ?? agent.troughMaxMgL ?? null;
	const targets =
		peakTarget !== null && troughTarget !== null
			? { peakMgL: requirePositive('targets.peakMgL', peakTarget), troughMgL: requirePositive('targets.troughMgL', troughTarget) }
			: null;
	const none = (reason: string): AminoglycosideLevels =>
		noKinetics(
			reason,
			{ ok, excluded, targets, history, trace },
			'Aminoglycoside kinetics from two levels',
			'Sawchuk–Zaske: two levels after the same dose',
			SOURCES.sawchukZaske,
			[input('usable levels', ok.length, 'levels', SOURCES.record)]
		);

	// the latest dose with at least two levels after the end of its infusion and before the next dose
	let chosen: { index: number; post: { level: DrugLevel; tMs: number }[] } | null = null;
	for (let i = doses.length - 1; i >= 0 && chosen === null; i--) {
		const nextMs = i + 1 < doses.length ? doses[i + 1].startMs : Infinity;
		const post = ok.filter((u) => u.tMs >= endMsOf(doses[i]) && u.tMs < nextMs);
		if (post.length >= 2) chosen = { index: i, post };
	}
	if (chosen === null) {
		const single = agent.singleLevelExtendedInterval === true ? singleLevelDose(doses, ok, args.schedule.intervalH) : null;
		if (single === null)
			return none(
				agent.singleLevelExtendedInterval === true
					? 'needs two levels drawn after the end of the same infusion and before the next dose, or one such level after an extended-interval dose (every 24 h or longer)'
					: 'needs two levels drawn after the end of the same infusion and before the next dose'
			);
		if (weightKg === null) return none('one level needs the population volume, and the Vd-basis weight is unknown');
		return singleLevelKinetics({ args, agent, history, trace, ok, excluded, targets, weightKg, atMs, ...single });
	}
	const dose = doses[chosen.index];
	// the widest-spaced pair after that dose gives the steadiest slope
	const first = chosen.post[0];
	const second = chosen.post[chosen.post.length - 1];
	const dtH = (second.tMs - first.tMs) / HOUR_MS;
	if (!(dtH > 0) || !(second.level.mgL < first.level.mgL))
		return none('the later level is not lower than the earlier one: k cannot be computed (check the sample times and labels)');
	const kPerH = Math.log(first.level.mgL / second.level.mgL) / dtH;
	const endMs = endMsOf(dose);
	const nextStartMs = chosen.index + 1 < doses.length ? doses[chosen.index + 1].startMs : dose.startMs + args.schedule.intervalH * HOUR_MS;
	const truePeakMgL = first.level.mgL * Math.exp((kPerH * (first.tMs - endMs)) / HOUR_MS);
	const trueTroughMgL = second.level.mgL * Math.exp((-kPerH * (nextStartMs - second.tMs)) / HOUR_MS);

	// concentration when the dose began: a level drawn after the previous infusion ended and before this dose,
	// carried forward at k; otherwise the earlier doses superposed (their share scales as 1/V, so V stays closed-form)
	const prevEndMs = chosen.index > 0 ? endMsOf(doses[chosen.index - 1]) : -Infinity;
	const pre = ok.filter((u) => u.tMs <= dose.startMs && u.tMs >= prevEndMs).pop() ?? null;
	const earlier = doses.slice(0, chosen.index);
	const unitShare = (tMs: number) => earlier.reduce((s, d) => s + singleDoseConcentration(d.doseMg, d.durationH, (tMs - d.startMs) / HOUR_MS, kPerH, 1), 0);
	const thisUnitPeak = singleDoseConcentration(dose.doseMg, dose.durationH, dose.durationH, kPerH, 1);
	let volumeL: number;
	let preDoseMgL: number;
	let preSource: string;
	if (pre !== null) {
		preDoseMgL = pre.level.mgL * Math.exp((-kPerH * (dose.startMs - pre.tMs)) / HOUR_MS);
		const carried = preDoseMgL * Math.exp(-kPerH * dose.durationH);
		if (!(truePeakMgL > carried)) return none('the pre-dose level is not below the extrapolated peak: Vd cannot be computed');
		volumeL = thisUnitPeak / (truePeakMgL - carried);
		preSource = `measured ${pre.level.mgL} mg/L at ${pre.level.at.toISOString()}, carried to the dose at k`;
	} else {
		volumeL = (unitShare(endMs) + thisUnitPeak) / truePeakMgL;
		preDoseMgL = unitShare(dose.startMs) / volumeL;
		preSource = earlier.length === 0 ? 'first dose: no drug before it' : `predicted from the ${earlier.length} earlier doses at k (no pre-dose level)`;
	}
	const clearanceLPerH = kPerH * volumeL;
	const kinetics: KineticsSnapshot = { clearanceLPerH, volumeL, kPerH, halfLifeH: Math.LN2 / kPerH };
	const volumePerKg = weightKg === null ? null : volumeL / weightKg;
	const used = [...(pre !== null ? [pre.level] : []), first.level, second.level];
	for (const u of ok)
		if (!used.includes(u.level))
			excluded.push({ level: u.level, reason: 'not used: the method takes two levels after one dose (the widest-spaced pair after the latest such dose)' });

	const src = SOURCES.sawchukZaske;
	const lv = (name: string, l: DrugLevel) => input(name, l.mgL, 'mg/L', `${SOURCES.record}, ${l.at.toISOString()} (${l.timing})`);
	trace.push(
		step(
			'agK',
			'Elimination rate constant from two levels',
			kPerH,
			'/h',
			'k = ln(C1 / C2) / (t2 − t1)',
			[lv('C1', first.level), lv('C2', second.level), input('t2 − t1', dtH, 'h', 'computed')],
			src
		),
		step('agHalfLife', 'Half-life from two levels', kinetics.halfLifeH, 'h', 't½ = ln2 / k', [input('k', kPerH, '/h', 'step agK')], SOURCES.oneCompartment),
		step(
			'agTruePeak',
			'True peak at the end of the infusion',
			truePeakMgL,
			'mg/L',
			'Cmax = C1 · e^(k (t1 − t_end))',
			[lv('C1', first.level), input('t1 − t_end', (first.tMs - endMs) / HOUR_MS, 'h', 'computed'), input('k', kPerH, '/h', 'step agK')],
			src
		),
		step(
			'agTrueTrough',
			'True trough before the next dose',
			trueTroughMgL,
			'mg/L',
			'Cmin = C2 · e^(−k (t_next − t2))',
			[
				lv('C2', second.level),
				input('t_next − t2', (nextStartMs - second.tMs) / HOUR_MS, 'h', chosen.index + 1 < doses.length ? 'next dose in the history' : 'order interval'),
				input('k', kPerH, '/h', 'step agK')
			],
			src
		),
		step(
			'agPreDose',
			'Concentration when the dose began',
			preDoseMgL,
			'mg/L',
			pre !== null ? 'C0 = C_pre · e^(−k (t_dose − t_pre))' : 'C0 = Σ earlier doses at k (superposition)',
			[input('k', kPerH, '/h', 'step agK')],
			src,
			preSource
		),
		step(
			'agVolume',
			'Volume of distribution from the peak',
			volumeL,
			'L',
			dose.durationH > 0 ? 'Vd = k0 (1 − e^(−k t′)) / (k (Cmax − C0 e^(−k t′))), k0 = dose / t′' : 'Vd = dose / (Cmax − C0)',
			[
				input('dose', dose.doseMg, 'mg', dose.source === 'given' ? SOURCES.record : 'order schedule (no recorded administration)'),
				input('t′', dose.durationH, 'h', dose.source === 'given' ? SOURCES.record : 'order schedule'),
				input('Cmax', truePeakMgL, 'mg/L', 'step agTruePeak'),
				input('C0', preDoseMgL, 'mg/L', 'step agPreDose'),
				input('k', kPerH, '/h', 'step agK')
			],
			src,
			volumePerKg === null ? undefined : `${fmt(volumePerKg, 3)} L/kg of the Vd-basis weight`
		),
		step(
			'agClearance',
			'Clearance from two levels',
			clearanceLPerH,
			'L/h',
			'CL = k · Vd',
			[input('k', kPerH, '/h', 'step agK'), input('Vd', volumeL, 'L', 'step agVolume')],
			SOURCES.oneCompartment
		)
	);
	for (const e of excluded)
		trace.push(
			step(
				'levelExcluded',
				'Level not used',
				e.level.mgL,
				'mg/L',
				'two levels after the same dose, outside any infusion',
				[input('drawn at', e.level.at.toISOString(), '', SOURCES.record), input('labelled', e.level.timing, '', SOURCES.record)],
				src,
				e.reason
			)
		);

	const proposal = proposalWithStep(args, agent, kinetics, targets, weightKg, history, atMs, trace, 'agVolume');
	return {
		method: 'two-level',
		kinetics,
		reason: null,
		dose,
		used,
		excluded,
		preDoseMgL,
		truePeakMgL,
		trueTroughMgL,
		volumePerKg,
		targets,
		proposal,
		history,
		trace
	};
}

/** The regimen to the targets from individual kinetics, and its trace step (both methods). */
function proposalWithStep(
	args: AminoglycosideLevelsInput,
	agent: AgentParams,
	kinetics: KineticsSnapshot,
	targets: AminoglycosideTargets | null,
	weightKg: number | null,
	history: DosingHistory,
	atMs: number,
	trace: TraceStep[],
	volumeStep: string
): LevelProposal {
	const src = SOURCES.sawchukZaske;
	const kPerH = kinetics.kPerH;
	const volumeL = kinetics.volumeL;
	let proposal: LevelProposal;
	if (targets === null) proposal = { proposed: null, reason: 'the agent has no peak target or trough limit in the library, and none was given' };
	else if (targets.troughMgL >= targets.peakMgL) proposal = { proposed: null, reason: 'the trough target must be below the peak target' };
	else proposal = proposeToTargets(agent, kinetics, targets, weightKg, runningIvTherapy(history, atMs), args.schedule.infusionH);
	trace.push(
		step(
			'agProposal',
			'Regimen to the peak/trough targets (individual)',
			proposal.proposed === null ? null : `${proposal.proposed.doseMg} mg every ${proposal.proposed.intervalH} h over ${proposal.proposed.infusionH} h`,
			'',
			'τ = t′ + ln(Cpeak / Ctrough) / k rounded up to 6, 8, 12, 18, 24, 36, 48 or 72 h; dose = Cpeak k Vd (1 − e^(−kτ)) t′ / (1 − e^(−k t′)) rounded to the dose step; daily dose within the usual maximum; checked against the proposal invariants',
			[
				input('Cpeak target', targets?.peakMgL ?? null, 'mg/L', args.targets?.peakMgL != null ? 'parameter' : SOURCES.agentLibrary),
				input('Ctrough limit', targets?.troughMgL ?? null, 'mg/L', args.targets?.troughMgL != null ? 'parameter' : SOURCES.agentLibrary),
				input('k', kPerH, '/h', 'step agK'),
				input('Vd', volumeL, 'L', `step ${volumeStep}`),
				input('predicted peak', proposal.proposed?.predicted?.peakMgL ?? null, 'mg/L', 'computed'),
				input('predicted trough', proposal.proposed?.predicted?.troughMgL ?? null, 'mg/L', 'computed')
			],
			src,
			proposal.reason ?? undefined
		)
	);
	return proposal;
}

/**
 * Extended-interval dosing (every 24 h or longer) read from one level: the latest dose with a level after the
 * end of its infusion and before the next dose, when no dose has two.
 */
function singleLevelDose(doses: readonly HistoryDose[], ok: readonly { level: DrugLevel; tMs: number }[], scheduleIntervalH: number) {
	for (let i = doses.length - 1; i >= 0; i--) {
		const nextMs = i + 1 < doses.length ? doses[i + 1].startMs : Infinity;
		const post = ok.filter((u) => u.tMs >= endMsOf(doses[i]) && u.tMs < nextMs);
		if (post.length === 0) continue;
		const intervalH = i + 1 < doses.length ? (doses[i + 1].startMs - doses[i].startMs) / HOUR_MS : scheduleIntervalH;
		if (intervalH < EXTENDED_INTERVAL_MIN_H) return null;
		return { index: i, level: post[post.length - 1] };
	}
	return null;
}

/**
 * One level after an extended-interval dose: the volume is the population's (the agent's L/kg × the Vd-basis
 * weight) and k the one at which the doses given, superposed, reach the measured level at its time (solved by
 * bisection: the predicted level falls as k rises). Less certain than two levels: the trace says so.
 */
function singleLevelKinetics(a: {
	args: AminoglycosideLevelsInput;
	agent: AgentParams;
	history: DosingHistory;
	trace: TraceStep[];
	ok: { level: DrugLevel; tMs: number }[];
	excluded: ExcludedLevel[];
	targets: AminoglycosideTargets | null;
	weightKg: number;
	atMs: number;
	index: number;
	level: { level: DrugLevel; tMs: number };
}): AminoglycosideLevels {
	const { args, agent, history, trace, ok, excluded, targets, weightKg, atMs, index, level } = a;
	const doses = history.doses.slice(0, index + 1);
	const dose = doses[index];
	const volumeL = agent.vdLPerKg * weightKg;
	const predicted = (k: number) => concentrationAtMs(doses, k, volumeL, level.tMs);
	const reasonNone = (reason: string): AminoglycosideLevels =>
		noKinetics(reason, { ok, excluded, targets, history, trace }, 'Aminoglycoside kinetics from one level', SINGLE_LEVEL_FORMULA, SOURCES.oneCompartment, []);
	let lo = K_MIN_PER_H;
	let hi = K_MAX_PER_H;
	const measured = level.level.mgL;
	if (!(measured > 0)) return reasonNone('the level is zero: k cannot be computed from it');
	if (predicted(lo) < measured)
		return reasonNone('the level is above what the doses given could reach at the population volume: check the sample time, the dose and the units');
	if (predicted(hi) > measured) return reasonNone('the level is too low for any plausible elimination rate: check the sample time and label');
	for (let i = 0; i < 80; i++) {
		const mid = Math.sqrt(lo * hi);
		if (predicted(mid) > measured) lo = mid;
		else hi = mid;
	}
	const kPerH = Math.sqrt(lo * hi);
	const kinetics: KineticsSnapshot = { clearanceLPerH: kPerH * volumeL, volumeL, kPerH, halfLifeH: Math.LN2 / kPerH };
	const endMs = endMsOf(dose);
	const nextStartMs = index + 1 < history.doses.length ? history.doses[index + 1].startMs : dose.startMs + args.schedule.intervalH * HOUR_MS;
	const truePeakMgL = concentrationAtMs(doses, kPerH, volumeL, endMs);
	const trueTroughMgL = concentrationAtMs(doses, kPerH, volumeL, nextStartMs);
	const preDoseMgL = concentrationAtMs(doses.slice(0, index), kPerH, volumeL, dose.startMs);
	for (const u of ok)
		if (u.level !== level.level) excluded.push({ level: u.level, reason: 'not used: one level after an extended-interval dose, the latest such' });
	const lv = input('C', measured, 'mg/L', `${SOURCES.record}, ${level.level.at.toISOString()} (${level.level.timing})`);
	trace.push(
		step(
			'agVolume',
			'Volume of distribution (population)',
			volumeL,
			'L',
			'Vd = Vd/kg × Vd-basis weight',
			[input('Vd/kg', agent.vdLPerKg, 'L/kg', SOURCES.agentLibrary), input('weight', weightKg, 'kg', 'patient record')],
			SOURCES.agentLibrary,
			'one level fixes one quantity: the volume is the population value, not the patient’s'
		),
		step(
			'agK',
			'Elimination rate constant from one level',
			kPerH,
			'/h',
			SINGLE_LEVEL_FORMULA,
			[lv, input('hours after the end of the infusion', (level.tMs - endMs) / HOUR_MS, 'h', 'computed'), input('Vd', volumeL, 'L', 'step agVolume')],
			SOURCES.oneCompartment,
			'extended-interval dosing read from one level: less certain than two levels after the same dose'
		),
		step('agHalfLife', 'Half-life from one level', kinetics.halfLifeH, 'h', 't½ = ln2 / k', [input('k', kPerH, '/h', 'step agK')], SOURCES.oneCompartment),
		step(
			'agTruePeak',
			'Peak at the end of the infusion (predicted)',
			truePeakMgL,
			'mg/L',
			'superposition at k and Vd',
			[input('k', kPerH, '/h', 'step agK')],
			SOURCES.oneCompartment
		),
		step(
			'agTrueTrough',
			'Trough before the next dose (predicted)',
			trueTroughMgL,
			'mg/L',
			'superposition at k and Vd',
			[input('k', kPerH, '/h', 'step agK')],
			SOURCES.oneCompartment
		),
		step(
			'agClearance',
			'Clearance from one level',
			kinetics.clearanceLPerH,
			'L/h',
			'CL = k · Vd',
			[input('k', kPerH, '/h', 'step agK'), input('Vd', volumeL, 'L', 'step agVolume')],
			SOURCES.oneCompartment
		)
	);
	const proposal = proposalWithStep(args, agent, kinetics, targets, weightKg, history, atMs, trace, 'agVolume');
	return {
		method: 'single-level',
		kinetics,
		reason: null,
		dose,
		used: [level.level],
		excluded,
		preDoseMgL,
		truePeakMgL,
		trueTroughMgL,
		volumePerKg: agent.vdLPerKg,
		targets,
		proposal,
		history,
		trace
	};
}

/** No kinetics from these levels: every usable level is kept with the reason, and the trace says why. */
function noKinetics(
	reason: string,
	c: { ok: { level: DrugLevel }[]; excluded: ExcludedLevel[]; targets: AminoglycosideTargets | null; history: DosingHistory; trace: TraceStep[] },
	label: string,
	formula: string,
	source: string,
	inputs: ReturnType<typeof input>[]
): AminoglycosideLevels {
	for (const u of c.ok) c.excluded.push({ level: u.level, reason: `not used: ${reason}` });
	c.trace.push(step('agLevels', label, null, '', formula, inputs, source, reason));
	return {
		method: null,
		kinetics: null,
		reason,
		dose: null,
		used: [],
		excluded: c.excluded,
		preDoseMgL: null,
		truePeakMgL: null,
		trueTroughMgL: null,
		volumePerKg: null,
		targets: c.targets,
		proposal: { proposed: null, reason },
		history: c.history,
		trace: c.trace
	};
}
