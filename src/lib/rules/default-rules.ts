// The default rule set (seeded as version 1). Every threshold is a named parameter with its default in
// PARAM_SPECS; the wording of findings and suggested actions follows clinical-reference §3–§4.
import { PARAM_SPECS, type ParamName } from './params';
import type { JsonLogic, RuleDefinition } from './types';

const v = (name: string): JsonLogic => ({ var: name });
const p = (name: ParamName): JsonLogic => ({ var: `params.${name}` });
const defaults = (...names: ParamName[]) => Object.fromEntries(names.map((n) => [n, PARAM_SPECS[n].defaultValue])) as Record<string, number>;
// Renal-state rules apply to agents whose dose depends on renal function (an explicit library flag, not
// an fe cut-off: ceftriaxone is half renally excreted yet never adjusted) given by an absorbed route.
const systemic: JsonLogic = { '==': [v('systemic'), true] };
const renallyAdjusted: JsonLogic = { and: [systemic, { '==': [v('renallyAdjusted'), true] }] };
const notOnDialysis: JsonLogic = { '==': [v('renalReplacement'), null] };
const isModel = (model: string): JsonLogic => ({ '==': [v('model'), model] });

/** The rule whose window judges the AUC24 from measured levels (read by aucWindowOf). */
export const MEASURED_AUC_RULE = 'vancomycin-measured-auc-outside-window';

export const DEFAULT_RULES: RuleDefinition[] = [
	{
		key: 'dose-above-band',
		title: 'Daily dose above the renal band',
		description:
			"A renally adjusted agent's daily dose is above the library's reduced regimen for today's renal function (beyond the tolerance): its CrCl band, its dialysis regimen, or the band of the indication the dose matches. Never raised in the agent's full-dose range.",
		enabled: true,
		severity: 'high',
		escalation: null,
		requires: ['doseBandRatio'],
		// in the agent's full-dose range nothing is reduced for renal reasons: a dose above the full regimen
		// there is the usual-maximum finding's business (meningitis doses, loading days, extended infusions)
		when: { and: [renallyAdjusted, { '==': [v('referenceUnadjusted'), false] }, { '>': [v('doseBandRatio'), { '+': [1, p('bandTolerance')] }] }] },
		params: defaults('bandTolerance'),
		finding: "Daily dose {dailyDoseMg} is {doseBandRatio} the {bandDailyDoseMg} of the library's regimen for today's renal function ({bandLabel}).",
		suggestedAction: 'Review the regimen against the band for the current CrCl (see the proposed regimen); watch for accumulation and toxicity.'
	},
	{
		key: 'dose-below-band',
		title: 'Daily dose below the renal band',
		description:
			"A renally adjusted agent's daily dose is below the library's regimen for today's renal function (beyond the tolerance), e.g. after renal recovery. Extended and continuous infusions count as within down to the library's fraction of the daily dose.",
		enabled: true,
		severity: 'moderate',
		escalation: null,
		requires: ['doseBandRatio'],
		when: { and: [renallyAdjusted, { '<': [{ '*': [v('doseBandRatio'), { '+': [1, p('bandTolerance')] }] }, 1] }] },
		params: defaults('bandTolerance'),
		finding:
			"Daily dose {dailyDoseMg} is {doseBandRatio} the {bandDailyDoseMg} of the library's regimen for today's renal function ({bandLabel}): exposure may be too low.",
		suggestedAction: 'Renal function may have recovered: consider the regimen of the current band once the creatinine trend is confirmed.'
	},
	{
		key: 'possible-arc',
		title: 'Possible augmented renal clearance',
		description: 'Estimated CrCl at or above the ARC threshold on a renally adjusted agent. Estimated CrCl is only a surrogate for a measured urinary CrCl.',
		enabled: true,
		severity: 'moderate',
		escalation: null,
		requires: ['crclMlMin'],
		when: { and: [renallyAdjusted, notOnDialysis, { '>=': [v('crclMlMin'), p('arcCrclMlMin')] }] },
		params: defaults('arcCrclMlMin'),
		finding: 'Possible augmented renal clearance: CrCl {crclMlMin} (threshold {params.arcCrclMlMin}) on a renally adjusted agent; exposure may be too low.',
		suggestedAction: 'Estimated CrCl is a weak surrogate: consider a measured urinary creatinine clearance, drug levels or extended infusion where available.'
	},
	{
		key: 'aki',
		title: 'Acute kidney injury on a renally adjusted or nephrotoxic agent',
		description:
			'KDIGO creatinine stage at or above the threshold while on a renally adjusted or nephrotoxic agent given by an absorbed route; higher stages are high severity. Not staged on dialysis (pre/post-session swings are not AKI).',
		enabled: true,
		severity: 'moderate',
		escalation: { when: { '>=': [v('kdigoStage'), p('akiHighStage')] }, severity: 'high' },
		requires: ['kdigoStage'],
		when: {
			and: [systemic, notOnDialysis, { '>=': [v('kdigoStage'), p('akiMinStage')] }, { or: [renallyAdjusted, { '==': [v('nephrotoxic'), true] }] }]
		},
		params: defaults('akiMinStage', 'akiHighStage'),
		finding:
			'AKI, KDIGO {kdigoStage}: creatinine {creatinineMgDl} against a baseline of {creatinineBaselineMgDl}. Cockcroft–Gault CrCl ({crclMlMin}) is unreliable while creatinine changes; kinetic GFR {kineticGfrMlMin}; doses follow {dosingCrclMlMin}.',
		suggestedAction: 'Review the regimen for accumulation and any nephrotoxic co-medication; prefer kinetic GFR or drug levels while creatinine is unstable.'
	},
	{
		key: 'half-life-prolonged',
		title: 'Expected half-life prolonged since the start',
		description:
			"The expected half-life now, from renal function alone, is at least the threshold multiple of its value at the order's start, on a renally adjusted agent. A change in total half-life that albumin alone explains is not accumulation and does not count.",
		enabled: true,
		severity: 'moderate',
		escalation: null,
		requires: ['halfLifeRatioRenal'],
		// only where the library adjusts for renal function: a longer t½ of ceftriaxone in AKI is no reason to cut its dose
		when: { and: [renallyAdjusted, { '>=': [v('halfLifeRatioRenal'), p('halfLifeRatioMin')] }] },
		params: defaults('halfLifeRatioMin'),
		finding:
			'Renal function alone makes the expected half-life {halfLifeRatioRenal} its value at the start (now {halfLifeH}, then {halfLifeAtStartH}): the drug will accumulate on the current regimen.',
		suggestedAction: 'Consider extending the interval or reducing the dose (see the proposed regimen), or checking a level.'
	},
	{
		key: 'low-albumin-highly-bound',
		title: 'Low albumin on a highly protein-bound agent',
		description:
			'Recent albumin below the threshold on an agent with protein binding at or above the threshold; below the severe threshold it is high severity (Ulldemolins M et al., Clin Pharmacokinet 2011;50:99–110).',
		enabled: true,
		severity: 'moderate',
		escalation: { when: { '<': [v('albuminGL'), p('albuminSevereGL')] }, severity: 'high' },
		requires: ['albuminGL', 'albuminAgeH'],
		when: {
			and: [
				systemic,
				{ '>=': [v('proteinBinding'), p('highlyBoundMin')] },
				{ '<': [v('albuminGL'), p('albuminModerateGL')] },
				{ '<=': [v('albuminAgeH'), p('albuminMaxAgeH')] }
			]
		},
		params: defaults('highlyBoundMin', 'albuminModerateGL', 'albuminSevereGL', 'albuminMaxAgeH'),
		finding:
			'Highly protein-bound agent (binding {proteinBinding}) with low albumin {albuminGL}: total levels will under-read unbound drug; expected shorter t½ ({halfLifeH}) / lower total trough.',
		suggestedAction: 'Consider unbound-level TDM or extended infusion where available. Do not recommend dose increases automatically.'
	},
	{
		key: 'creatinine-missing',
		title: 'No recent creatinine on a renally adjusted agent',
		description:
			"No creatinine result within the agent's own limit (agent library; the parameter caps it) on a renally adjusted agent: the renal estimates cannot be trusted.",
		enabled: true,
		severity: 'low',
		escalation: null,
		requires: [],
		when: {
			and: [
				renallyAdjusted,
				{
					or: [{ '==': [v('creatinineAgeH'), null] }, { '>': [v('creatinineAgeH'), { min: [v('agentCreatinineMaxAgeH'), p('creatinineMaxAgeH')] }] }]
				}
			]
		},
		params: defaults('creatinineMaxAgeH'),
		finding: "No creatinine within the agent's limit of {agentCreatinineMaxAgeH} on a renally adjusted agent; age of the latest result: {creatinineAgeH}.",
		suggestedAction: 'Request a creatinine so the dose can be checked against current renal function.'
	},
	{
		key: 'creatinine-unstable',
		title: 'Creatinine unstable',
		description:
			'Creatinine rose or fell by at least the threshold within 48 h on a renally adjusted agent: Cockcroft–Gault assumes a steady state and is unreliable; doses follow the lower of Cockcroft–Gault and kinetic GFR. Not judged on dialysis.',
		enabled: true,
		severity: 'moderate',
		escalation: null,
		requires: ['creatinineRise48hMgDl'],
		when: {
			and: [
				renallyAdjusted,
				notOnDialysis,
				{ or: [{ '>=': [v('creatinineRise48hMgDl'), p('unstableChangeMgDl')] }, { '>=': [v('creatinineFall48hMgDl'), p('unstableChangeMgDl')] }] }
			]
		},
		params: defaults('unstableChangeMgDl'),
		finding:
			'Creatinine unstable (rise {creatinineRise48hMgDl}, fall {creatinineFall48hMgDl} within 48 h): Cockcroft–Gault CrCl {crclMlMin} is unreliable; kinetic GFR {kineticGfrMlMin}.',
		suggestedAction: 'Dose on kinetic GFR or drug levels until creatinine settles; re-check tomorrow.'
	},
	{
		key: 'no-regimen-for-renal-function',
		title: 'No regimen in the library for this renal function',
		description:
			"The agent is renally adjusted but the library has no regimen for today's renal function or dialysis (its bands stop above it), or marks the agent not recommended there. A full dose at that renal function is high severity.",
		enabled: true,
		severity: 'moderate',
		escalation: { when: { '>=': [v('fullDoseRatio'), { '/': [1, { '+': [1, p('bandTolerance')] }] }] }, severity: 'high' },
		requires: [],
		when: { and: [renallyAdjusted, { in: [v('regimenStatus'), ['none', 'avoid']] }] },
		params: defaults('bandTolerance'),
		finding: '{agentName} {dailyDoseMg} at dosing CrCl {dosingCrclMlMin}: {regimenReason}.',
		suggestedAction: 'Check the product information and specialist advice for this renal function; consider an alternative agent or dosing by levels.'
	},
	{
		key: 'above-usual-maximum',
		title: 'Daily dose above the usual maximum',
		description:
			"The order's daily dose is above the agent's usual maximum (route, agent, or the full regimen of the indication its dose matches). Not a renal finding: some indications justify it.",
		enabled: true,
		severity: 'low',
		escalation: null,
		requires: ['usualMaxDailyDoseMg'],
		when: { and: [systemic, { '==': [v('aboveUsualMax'), true] }] },
		params: {},
		finding: 'Daily dose {dailyDoseMg} is above the usual maximum of {usualMaxDailyDoseMg} for {agentName}: check the indication.',
		suggestedAction: 'Confirm the indication justifies the dose (e.g. CNS infection); otherwise consider the usual regimen.'
	},
	{
		key: 'trough-above-limit',
		title: 'Predicted trough above the agent’s limit',
		description: "The predicted steady-state trough of the current regimen is above the agent's trough limit (aminoglycosides, vancomycin).",
		enabled: true,
		severity: 'high',
		escalation: null,
		requires: ['troughMgL', 'troughMaxMgL'],
		// a measured trough supersedes the prediction (rule aminoglycoside-measured-trough-above-limit)
		when: {
			and: [systemic, { '==': [v('measuredTroughMgL'), null] }, { '>': [v('troughMgL'), { '*': [v('troughMaxMgL'), p('troughLimitFactor')] }] }]
		},
		params: defaults('troughLimitFactor'),
		finding: 'Predicted steady-state trough {troughMgL} is above the limit of {troughMaxMgL} for {agentName} (population estimate).',
		suggestedAction: 'Consider extending the interval and confirm with a measured level (see the proposed regimen).'
	},
	{
		key: 'vancomycin-auc-outside-target',
		title: 'Vancomycin AUC24 outside the target',
		description:
			'Predicted vancomycin AUC24 below or above the target range (Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864); above it is high severity.',
		enabled: true,
		severity: 'moderate',
		escalation: { when: { '>': [v('auc24MgHL'), p('aucHighMgHL')] }, severity: 'high' },
		requires: ['auc24MgHL'],
		when: {
			and: [
				systemic,
				isModel('vancomycin'),
				// an AUC24 from measured levels supersedes the population estimate (rule vancomycin-measured-auc-outside-window)
				{ '==': [v('measuredAuc24MgHL'), null] },
				{ or: [{ '<': [v('auc24MgHL'), p('aucLowMgHL')] }, { '>': [v('auc24MgHL'), p('aucHighMgHL')] }] }
			]
		},
		params: defaults('aucLowMgHL', 'aucHighMgHL'),
		finding: 'Predicted AUC24 {auc24MgHL} is outside the target {params.aucLowMgHL}–{params.aucHighMgHL} (population estimate).',
		suggestedAction: 'Adjust to the AUC24 target (see the proposed regimen) and confirm with measured levels.'
	},
	{
		key: 'aminoglycoside-measured-trough-above-limit',
		title: 'Measured aminoglycoside trough above the limit',
		description: "The latest measured aminoglycoside trough (drawn after a dose, not during an infusion) is above the agent's trough limit in the library.",
		enabled: true,
		severity: 'high',
		escalation: null,
		requires: ['measuredTroughMgL'],
		when: {
			and: [systemic, isModel('aminoglycoside'), { '!=': [v('troughMaxMgL'), null] }, { '>': [v('measuredTroughMgL'), v('troughMaxMgL')] }]
		},
		params: {},
		finding: 'Measured trough {measuredTroughMgL} ({measuredTroughAgeH} ago) is above the limit of {troughMaxMgL} for {agentName}.',
		suggestedAction: 'Extend the interval (see the proposed regimen from the levels); watch renal function and hearing.'
	},
	{
		key: 'vancomycin-measured-trough-high',
		title: 'Measured vancomycin trough high',
		description:
			'The latest measured vancomycin trough (drawn after a dose, not during an infusion) is above the threshold: troughs above 15–20 mg/L add nephrotoxicity without better outcomes (Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864).',
		enabled: true,
		severity: 'high',
		escalation: null,
		requires: ['measuredTroughMgL'],
		when: { and: [systemic, isModel('vancomycin'), { '>': [v('measuredTroughMgL'), p('vancomycinTroughMaxMgL')] }] },
		params: defaults('vancomycinTroughMaxMgL'),
		finding: 'Measured vancomycin trough {measuredTroughMgL} ({measuredTroughAgeH} ago) is above {params.vancomycinTroughMaxMgL}.',
		suggestedAction: 'Review the regimen against the AUC24 from the levels (see the proposed regimen); watch renal function.'
	},
	{
		key: MEASURED_AUC_RULE,
		title: 'Vancomycin AUC24 from levels outside the window',
		description:
			"The steady-state AUC24 of the current regimen from the patient's own clearance (Bayesian fit to measured levels) is below or above the window (Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864); above it is high severity. The window is also the one the level-based proposal aims at.",
		enabled: true,
		severity: 'moderate',
		escalation: { when: { '>': [v('measuredAuc24MgHL'), p('aucHighMgHL')] }, severity: 'high' },
		requires: ['measuredAuc24MgHL'],
		when: {
			and: [systemic, isModel('vancomycin'), { or: [{ '<': [v('measuredAuc24MgHL'), p('aucLowMgHL')] }, { '>': [v('measuredAuc24MgHL'), p('aucHighMgHL')] }] }]
		},
		params: defaults('aucLowMgHL', 'aucHighMgHL'),
		finding:
			'AUC24 from {measuredLevelCount} measured levels is {measuredAuc24MgHL}, outside the window {params.aucLowMgHL}–{params.aucHighMgHL} (individual clearance {measuredClearanceLPerH}).',
		suggestedAction: "Adjust to the window with the regimen from the patient's own clearance (see the proposed regimen); re-check a level at steady state."
	},
	{
		key: 'level-due',
		title: 'Level due',
		description:
			'An intravenous order of an agent dosed from levels (vancomycin by AUC24, aminoglycosides by peak and trough) has run longer than the threshold with no measured level (common practice).',
		enabled: true,
		severity: 'low',
		escalation: null,
		requires: ['measuredLevelCount'],
		when: {
			and: [
				systemic,
				{ '==': [v('route'), 'iv'] },
				{ '==': [v('dosedByLevels'), true] },
				{ '==': [v('measuredLevelCount'), 0] },
				{ '>': [v('orderAgeH'), p('levelDueAfterH')] }
			]
		},
		params: defaults('levelDueAfterH'),
		finding: 'No {agentName} level {orderAgeH} into the order (dosed from levels; a level is due after {params.levelDueAfterH}).',
		suggestedAction: 'Request a level (a trough before the next dose, and for AUC dosing a second level after the infusion).'
	},
	{
		key: 'measured-trough-disagrees',
		title: 'Measured trough far from the population prediction',
		description:
			"The latest measured trough differs from the population prediction for its time by more than the factor either way (common practice): the patient's kinetics are not the population's, or the level's time or the doses given are not what the record says.",
		enabled: true,
		severity: 'moderate',
		escalation: null,
		requires: ['measuredTroughRatio'],
		when: {
			and: [
				systemic,
				{
					or: [
						{ '>': [v('measuredTroughRatio'), p('levelDisagreementFactor')] },
						{ '<': [{ '*': [v('measuredTroughRatio'), p('levelDisagreementFactor')] }, 1] }
					]
				}
			]
		},
		params: defaults('levelDisagreementFactor'),
		finding:
			'Measured trough {measuredTroughMgL} is {measuredTroughRatio} the population prediction of {measuredTroughPredictedMgL} for that time: the population estimate does not fit this patient.',
		suggestedAction: "Check the level's time against the doses given; dose from the levels (see the proposed regimen), not the population estimate."
	}
];

/** A fresh copy, so callers may edit it. */
export function defaultRules(): RuleDefinition[] {
	return structuredClone(DEFAULT_RULES);
}

/**
 * The tolerance around a regimen's daily dose the rule set uses: one value for the whole set (the first
 * rule carrying it; saving a set whose rules disagree is refused), read by the rules, the assessment's
 * "within / above / below" and the flag page, so that they agree after an administrator changes it.
 */
export function bandToleranceOf(rules: readonly RuleDefinition[]): number {
	const value = rules.find((r) => 'bandTolerance' in r.params)?.params.bandTolerance;
	return typeof value === 'number' && Number.isFinite(value) && value >= 0 ? value : PARAM_SPECS.bandTolerance.defaultValue;
}

/**
 * The vancomycin AUC24 window the rule set judges measured levels by, which the assessment's level-based
 * proposal aims at too; undefined (the agent's own target) when the rule is absent or its window is not one.
 */
export function aucWindowOf(rules: readonly RuleDefinition[]): [number, number] | undefined {
	const params = rules.find((r) => r.key === MEASURED_AUC_RULE)?.params;
	const low = params?.aucLowMgHL;
	const high = params?.aucHighMgHL;
	return typeof low === 'number' && typeof high === 'number' && low > 0 && high > low ? [low, high] : undefined;
}

/**
 * The rule set with the one band tolerance in every rule that reads it (the same array when they already
 * agree). For sets stored before disagreement was refused.
 */
export function withOneBandTolerance<T extends readonly RuleDefinition[]>(rules: T): T {
	const tolerance = bandToleranceOf(rules);
	if (rules.every((r) => !('bandTolerance' in r.params) || r.params.bandTolerance === tolerance)) return rules;
	return rules.map((r) => ('bandTolerance' in r.params ? { ...r, params: { ...r.params, bandTolerance: tolerance } } : r)) as unknown as T;
}
