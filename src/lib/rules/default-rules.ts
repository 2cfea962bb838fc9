// The default rule set (seeded as version 1). Every threshold is a named parameter with its default in
// PARAM_SPECS; the wording of findings and suggested actions follows clinical-reference §3–§4.
import { PARAM_SPECS, type ParamName } from './params';
import type { JsonLogic, RuleDefinition } from './types';

const v = (name: string): JsonLogic => ({ var: name });
const p = (name: ParamName): JsonLogic => ({ var: `params.${name}` });
const defaults = (...names: ParamName[]) => Object.fromEntries(names.map((n) => [n, PARAM_SPECS[n].defaultValue])) as Record<string, number>;
const renallyCleared: JsonLogic = { '>=': [v('fe'), p('renalFeMin')] };

export const DEFAULT_RULES: RuleDefinition[] = [
	{
		key: 'dose-above-band',
		title: 'Daily dose above the renal band',
		description: "The order's daily dose is above the daily dose of the agent's renal band for today's CrCl (beyond the tolerance).",
		enabled: true,
		severity: 'high',
		escalation: null,
		requires: ['doseBandRatio'],
		when: { '>': [v('doseBandRatio'), { '+': [1, p('bandTolerance')] }] },
		params: defaults('bandTolerance'),
		finding: "Daily dose {dailyDoseMg} is {doseBandRatio} the renal band's {bandDailyDoseMg} for today's CrCl {crclMlMin} ({bandLabel}).",
		suggestedAction:
			'Review the regimen against the band for the current CrCl (see the proposed regimen); watch for accumulation and toxicity.'
	},
	{
		key: 'dose-below-band',
		title: 'Daily dose below the renal band',
		description: "A renally cleared agent's daily dose is below the daily dose of its renal band for today's CrCl (beyond the tolerance), e.g. after renal recovery.",
		enabled: true,
		severity: 'moderate',
		escalation: null,
		requires: ['doseBandRatio'],
		when: { and: [renallyCleared, { '<': [{ '*': [v('doseBandRatio'), { '+': [1, p('bandTolerance')] }] }, 1] }] },
		params: defaults('bandTolerance', 'renalFeMin'),
		finding:
			"Daily dose {dailyDoseMg} is {doseBandRatio} the renal band's {bandDailyDoseMg} for today's CrCl {crclMlMin} ({bandLabel}) on a renally cleared agent (fe {fe}): exposure may be too low.",
		suggestedAction:
			'Renal function may have recovered: consider the regimen of the current band once the creatinine trend is confirmed.'
	},
	{
		key: 'possible-arc',
		title: 'Possible augmented renal clearance',
		description: 'Estimated CrCl at or above the ARC threshold on a renally cleared agent. Estimated CrCl is only a surrogate for a measured urinary CrCl.',
		enabled: true,
		severity: 'moderate',
		escalation: null,
		requires: ['crclMlMin'],
		when: { and: [renallyCleared, { '>=': [v('crclMlMin'), p('arcCrclMlMin')] }] },
		params: defaults('arcCrclMlMin', 'renalFeMin'),
		finding: 'Possible augmented renal clearance: CrCl {crclMlMin} (threshold {params.arcCrclMlMin}) on a renally cleared agent (fe {fe}); exposure may be too low.',
		suggestedAction:
			'Estimated CrCl is a weak surrogate: consider a measured urinary creatinine clearance, drug levels or extended infusion where available.'
	},
	{
		key: 'aki',
		title: 'Acute kidney injury on a renally cleared or nephrotoxic agent',
		description: 'KDIGO creatinine stage at or above the threshold while on a renally cleared or nephrotoxic agent; higher stages are high severity.',
		enabled: true,
		severity: 'moderate',
		escalation: { when: { '>=': [v('kdigoStage'), p('akiHighStage')] }, severity: 'high' },
		requires: ['kdigoStage'],
		when: {
			and: [{ '>=': [v('kdigoStage'), p('akiMinStage')] }, { or: [renallyCleared, { '==': [v('nephrotoxic'), true] }] }]
		},
		params: defaults('akiMinStage', 'akiHighStage', 'renalFeMin'),
		finding:
			'AKI, KDIGO {kdigoStage}: creatinine {creatinineMgDl} against a baseline of {creatinineBaselineMgDl}. Cockcroft–Gault CrCl ({crclMlMin}) is unreliable while creatinine changes; kinetic GFR {kineticGfrMlMin}.',
		suggestedAction:
			'Review the regimen for accumulation and any nephrotoxic co-medication; prefer kinetic GFR or drug levels while creatinine is unstable.'
	},
	{
		key: 'half-life-prolonged',
		title: 'Expected half-life prolonged since the start',
		description: "The expected half-life now is at least the threshold multiple of its value at the order's start.",
		enabled: true,
		severity: 'moderate',
		escalation: null,
		requires: ['halfLifeRatio'],
		when: { '>=': [v('halfLifeRatio'), p('halfLifeRatioMin')] },
		params: defaults('halfLifeRatioMin'),
		finding: 'Expected half-life {halfLifeH} is {halfLifeRatio} its value at the start ({halfLifeAtStartH}): the drug will accumulate on the current regimen.',
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
				{ '>=': [v('proteinBinding'), p('highlyBoundMin')] },
				{ '<': [v('albuminGL'), p('albuminModerateGL')] },
				{ '<=': [v('albuminAgeH'), p('albuminMaxAgeH')] }
			]
		},
		params: defaults('highlyBoundMin', 'albuminModerateGL', 'albuminSevereGL', 'albuminMaxAgeH'),
		finding:
			'Highly protein-bound agent (binding {proteinBinding}) with low albumin {albuminGL}: total levels will under-read unbound drug; expected shorter t½ ({halfLifeH}) / lower total trough.',
		suggestedAction:
			'Consider unbound-level TDM or extended infusion where available. Do not recommend dose increases automatically.'
	},
	{
		key: 'creatinine-missing',
		title: 'No recent creatinine on a renally cleared agent',
		description: 'No creatinine result within the threshold on a renally cleared agent: the renal estimates cannot be trusted.',
		enabled: true,
		severity: 'low',
		escalation: null,
		requires: [],
		when: {
			and: [renallyCleared, { or: [{ '==': [v('creatinineAgeH'), null] }, { '>=': [v('creatinineAgeH'), p('creatinineMaxAgeH')] }] }]
		},
		params: defaults('creatinineMaxAgeH', 'renalFeMin'),
		finding: 'No creatinine in the last {params.creatinineMaxAgeH} on a renally cleared agent (fe {fe}); age of the latest result: {creatinineAgeH}.',
		suggestedAction: 'Request a creatinine so the dose can be checked against current renal function.'
	},
	{
		key: 'creatinine-unstable',
		title: 'Creatinine unstable',
		description:
			'Creatinine rose or fell by at least the threshold within 48 h on a renally cleared agent: Cockcroft–Gault assumes a steady state and is unreliable; kinetic GFR is shown.',
		enabled: true,
		severity: 'moderate',
		escalation: null,
		requires: ['creatinineRise48hMgDl'],
		when: {
			and: [
				renallyCleared,
				{ or: [{ '>=': [v('creatinineRise48hMgDl'), p('unstableChangeMgDl')] }, { '>=': [v('creatinineFall48hMgDl'), p('unstableChangeMgDl')] }] }
			]
		},
		params: defaults('unstableChangeMgDl', 'renalFeMin'),
		finding:
			'Creatinine unstable (rise {creatinineRise48hMgDl}, fall {creatinineFall48hMgDl} within 48 h): Cockcroft–Gault CrCl {crclMlMin} is unreliable; kinetic GFR {kineticGfrMlMin}.',
		suggestedAction: 'Dose on kinetic GFR or drug levels until creatinine settles; re-check tomorrow.'
	},
	{
		key: 'trough-above-limit',
		title: 'Predicted trough above the agent’s limit',
		description: "The predicted steady-state trough of the current regimen is above the agent's trough limit (aminoglycosides, vancomycin).",
		enabled: true,
		severity: 'high',
		escalation: null,
		requires: ['troughMgL', 'troughMaxMgL'],
		when: { '>': [v('troughMgL'), { '*': [v('troughMaxMgL'), p('troughLimitFactor')] }] },
		params: defaults('troughLimitFactor'),
		finding: 'Predicted steady-state trough {troughMgL} is above the limit of {troughMaxMgL} for {agentName} (population estimate).',
		suggestedAction: 'Consider extending the interval and confirm with a measured level (see the proposed regimen).'
	},
	{
		key: 'vancomycin-auc-outside-target',
		title: 'Vancomycin AUC24 outside the target',
		description: 'Predicted vancomycin AUC24 below or above the target range (Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864); above it is high severity.',
		enabled: true,
		severity: 'moderate',
		escalation: { when: { '>': [v('auc24MgHL'), p('aucHighMgHL')] }, severity: 'high' },
		requires: ['auc24MgHL'],
		when: {
			and: [{ '==': [v('model'), 'vancomycin'] }, { or: [{ '<': [v('auc24MgHL'), p('aucLowMgHL')] }, { '>': [v('auc24MgHL'), p('aucHighMgHL')] }] }]
		},
		params: defaults('aucLowMgHL', 'aucHighMgHL'),
		finding: 'Predicted AUC24 {auc24MgHL} is outside the target {params.aucLowMgHL}–{params.aucHighMgHL} (population estimate).',
		suggestedAction: 'Adjust to the AUC24 target (see the proposed regimen) and confirm with measured levels.'
	}
];

/** A fresh copy, so callers may edit it. */
export function defaultRules(): RuleDefinition[] {
	return structuredClone(DEFAULT_RULES);
}
