// Each default rule at its threshold, just past it and just before it. Where the source states a strict
// inequality ("albumin < 30 g/L", "above the limit", "outside 400–600"), the boundary value itself is
// quiet, as the source says, and the first value past it fires; inclusive thresholds ("≥ 130 mL/min",
// "stage ≥ 1", "≥ 1.5 ×") fire at the boundary.
import { describe, expect, it } from 'vitest';
import { DEFAULT_RULES, evaluateRule, evaluateRules, PARAM_SPECS, validateRuleSet, type Facts } from '../../../src/lib/rules';
import { quietFacts } from './helpers';

function numbersIn(node: unknown): number[] {
	if (typeof node === 'number') return [node];
	if (Array.isArray(node)) return node.flatMap(numbersIn);
	if (node && typeof node === 'object') return Object.values(node).flatMap(numbersIn);
	return [];
}

const rule = (key: string) => {
	const found = DEFAULT_RULES.find((r) => r.key === key);
	if (!found) throw new Error(`no default rule ${key}`);
	return found;
};
const run = (key: string, overrides: Partial<Facts>) => evaluateRule(rule(key), quietFacts(overrides));
const status = (key: string, overrides: Partial<Facts>) => run(key, overrides).status;
const severity = (key: string, overrides: Partial<Facts>) => run(key, overrides).severity;

describe('the default rule set', () => {
	it('is valid, has stable unique keys and names every threshold as a parameter with its default', () => {
		expect(validateRuleSet(DEFAULT_RULES).ok).toBe(true);
		expect(DEFAULT_RULES.map((r) => r.key)).toEqual([
			'dose-above-band',
			'dose-below-band',
			'possible-arc',
			'aki',
			'half-life-prolonged',
			'low-albumin-highly-bound',
			'creatinine-missing',
			'creatinine-unstable',
			'no-regimen-for-renal-function',
			'above-usual-maximum',
			'trough-above-limit',
			'vancomycin-auc-outside-target',
			'aminoglycoside-measured-trough-above-limit',
			'vancomycin-measured-trough-high',
			'vancomycin-measured-auc-outside-window',
			'level-due',
			'measured-trough-disagrees'
		]);
		for (const r of DEFAULT_RULES) {
			for (const [name, value] of Object.entries(r.params)) {
				expect(value, `${r.key}.${name}`).toBe(PARAM_SPECS[name as keyof typeof PARAM_SPECS].defaultValue);
			}
			// no threshold hides as a literal number: the only literals are the 1 of "1 + tolerance" and the like
			expect(
				numbersIn([r.when, r.escalation?.when]).filter((n) => n !== 0 && n !== 1),
				r.key
			).toEqual([]);
		}
	});

	it('stays quiet on an unremarkable order', () => {
		expect(evaluateRules(DEFAULT_RULES, quietFacts()).filter((o) => o.status === 'holds')).toEqual([]);
	});
});

describe('dose-above-band — tolerance 20 % around the band (common practice)', () => {
	it('is quiet just before and at 1.2 × the band (within tolerance), fires just past it', () => {
		expect(status('dose-above-band', { doseBandRatio: 1.19 })).toBe('quiet');
		expect(status('dose-above-band', { doseBandRatio: 1.2 })).toBe('quiet');
		expect(status('dose-above-band', { doseBandRatio: 1.2001 })).toBe('holds');
		expect(status('dose-above-band', { doseBandRatio: 2 })).toBe('holds');
		expect(severity('dose-above-band', { doseBandRatio: 2 })).toBe('high');
	});
	it('is indeterminate when the band fixes no dose', () => {
		expect(status('dose-above-band', { doseBandRatio: null, bandDailyDoseMg: null })).toBe('indeterminate');
	});
});

describe('dose-below-band — renally adjusted agents (the library says so, not an fe cut-off), 1/1.2 of the band (common practice)', () => {
	it('is quiet just before and at 1/1.2 × the band, fires just past it', () => {
		expect(status('dose-below-band', { doseBandRatio: 0.84 })).toBe('quiet');
		expect(status('dose-below-band', { doseBandRatio: 1 / 1.2 })).toBe('quiet');
		expect(status('dose-below-band', { doseBandRatio: 0.8333 })).toBe('holds');
		expect(status('dose-below-band', { doseBandRatio: 0.5 })).toBe('holds');
	});
	it('applies to renally adjusted agents whatever their fe, and to no other', () => {
		// ertapenem: fe 0.38 yet a renal band (product information); ceftriaxone: fe ~0.5, no renal adjustment
		expect(status('dose-below-band', { doseBandRatio: 0.5, fe: 0.38, renallyAdjusted: true })).toBe('holds');
		expect(status('dose-below-band', { doseBandRatio: 0.5, fe: 0.5, renallyAdjusted: false })).toBe('quiet');
	});
	it('is quiet for a route the agent is not absorbed by', () => {
		expect(status('dose-below-band', { doseBandRatio: 0.5, systemic: false })).toBe('quiet');
	});
});

describe('possible-arc — CrCl ≥ 130 mL/min (Udy AA et al., Crit Care Med 2014;42:520–527; clinical-reference F9, A25)', () => {
	it('fires at and just past 130 mL/min and is quiet just before', () => {
		expect(status('possible-arc', { crclMlMin: 129.9 })).toBe('quiet');
		expect(status('possible-arc', { crclMlMin: 130 })).toBe('holds');
		expect(status('possible-arc', { crclMlMin: 130.1 })).toBe('holds');
		// clinical-reference A25: CrCl 140 → ARC
		expect(status('possible-arc', { crclMlMin: 140 })).toBe('holds');
	});
	it('needs a renally adjusted agent (common practice)', () => {
		expect(status('possible-arc', { crclMlMin: 140, renallyAdjusted: false })).toBe('quiet');
		expect(status('possible-arc', { crclMlMin: 140, renallyAdjusted: true })).toBe('holds');
	});
	it('names the CrCl and the threshold with units in its finding', () => {
		expect(run('possible-arc', { crclMlMin: 142.4 }).finding).toMatch(/CrCl 142\s?mL\/min \(threshold 130\s?mL\/min\)/u);
	});
});

describe('aki — KDIGO stage ≥ 1 (KDIGO AKI Work Group, Kidney Int Suppl 2012;2:1–138; clinical-reference F8, §3)', () => {
	it('fires at stage 1 and past it, is quiet at stage 0', () => {
		expect(status('aki', { kdigoStage: 0 })).toBe('quiet');
		expect(status('aki', { kdigoStage: 1 })).toBe('holds');
		expect(status('aki', { kdigoStage: 2 })).toBe('holds');
	});
	it('is moderate at stage 1 and high from stage 2 (common practice)', () => {
		expect(severity('aki', { kdigoStage: 1 })).toBe('moderate');
		expect(severity('aki', { kdigoStage: 2 })).toBe('high');
		expect(severity('aki', { kdigoStage: 3 })).toBe('high');
	});
	it('applies to renally cleared or nephrotoxic agents only', () => {
		expect(status('aki', { kdigoStage: 1, renallyAdjusted: false })).toBe('quiet');
		expect(status('aki', { kdigoStage: 1, renallyAdjusted: false, nephrotoxic: true })).toBe('holds');
	});
});

describe('half-life-prolonged — t½ ≥ 1.5 × its value at the start (common practice)', () => {
	it('fires at and just past 1.5 × and is quiet just before', () => {
		expect(status('half-life-prolonged', { halfLifeRatioRenal: 1.49 })).toBe('quiet');
		expect(status('half-life-prolonged', { halfLifeRatioRenal: 1.5 })).toBe('holds');
		expect(status('half-life-prolonged', { halfLifeRatioRenal: 1.51 })).toBe('holds');
	});
	it('is indeterminate without a half-life at the start', () => {
		expect(status('half-life-prolonged', { halfLifeRatioRenal: null })).toBe('indeterminate');
	});
});

describe('low-albumin-highly-bound — albumin < 30 g/L moderate, < 25 g/L high, binding ≥ 70 % (clinical-reference §3–§4, from memory)', () => {
	const bound = { proteinBinding: 0.9 };
	it('is quiet at 30 g/L and just above, fires just below', () => {
		expect(status('low-albumin-highly-bound', { ...bound, albuminGL: 30.1 })).toBe('quiet');
		expect(status('low-albumin-highly-bound', { ...bound, albuminGL: 30 })).toBe('quiet');
		expect(status('low-albumin-highly-bound', { ...bound, albuminGL: 29.9 })).toBe('holds');
	});
	it('is moderate down to 25 g/L and high just below it', () => {
		expect(severity('low-albumin-highly-bound', { ...bound, albuminGL: 25.1 })).toBe('moderate');
		expect(severity('low-albumin-highly-bound', { ...bound, albuminGL: 25 })).toBe('moderate');
		expect(severity('low-albumin-highly-bound', { ...bound, albuminGL: 24.9 })).toBe('high');
	});
	it('applies from a binding of 70 % (at the threshold), not just below', () => {
		expect(status('low-albumin-highly-bound', { proteinBinding: 0.69, albuminGL: 20 })).toBe('quiet');
		expect(status('low-albumin-highly-bound', { proteinBinding: 0.7, albuminGL: 20 })).toBe('holds');
		expect(status('low-albumin-highly-bound', { proteinBinding: 0.71, albuminGL: 20 })).toBe('holds');
	});
	it('counts an albumin up to 168 h old (common practice) and not older', () => {
		expect(status('low-albumin-highly-bound', { ...bound, albuminGL: 20, albuminAgeH: 168 })).toBe('holds');
		expect(status('low-albumin-highly-bound', { ...bound, albuminGL: 20, albuminAgeH: 168.1 })).toBe('quiet');
	});
	it('uses the suggested wording and never recommends a dose increase (clinical-reference §4)', () => {
		const outcome = run('low-albumin-highly-bound', { ...bound, albuminGL: 22 });
		expect(outcome.finding).toContain('total levels will under-read unbound drug');
		expect(outcome.suggestedAction).toContain('Consider unbound-level TDM or extended infusion where available.');
		expect(outcome.suggestedAction).toContain('Do not recommend dose increases automatically.');
	});
});

describe("creatinine-missing — no creatinine within the agent's own limit on a renally adjusted agent (common practice)", () => {
	it('is quiet at the 72-h limit of a 72-h agent and fires just past it (the same age assess() calls stale)', () => {
		expect(status('creatinine-missing', { creatinineAgeH: 71.9 })).toBe('quiet');
		expect(status('creatinine-missing', { creatinineAgeH: 72 })).toBe('quiet');
		expect(status('creatinine-missing', { creatinineAgeH: 72.1 })).toBe('holds');
	});
	it("uses the agent's own shorter limit: 48 h for a nephrotoxic agent such as vancomycin (agent library)", () => {
		expect(status('creatinine-missing', { creatinineAgeH: 48, agentCreatinineMaxAgeH: 48 })).toBe('quiet');
		expect(status('creatinine-missing', { creatinineAgeH: 48.5, agentCreatinineMaxAgeH: 48 })).toBe('holds');
	});
	it('fires when there is no creatinine at all, and only for renally adjusted agents', () => {
		expect(status('creatinine-missing', { creatinineAgeH: null, creatinineMgDl: null })).toBe('holds');
		expect(status('creatinine-missing', { creatinineAgeH: null, renallyAdjusted: false })).toBe('quiet');
	});
	it('says "not available" for the age when there is none', () => {
		expect(run('creatinine-missing', { creatinineAgeH: null }).finding).toContain('age of the latest result: not available');
	});
});

describe('creatinine-unstable — rise or fall ≥ 0.3 mg/dL within 48 h (KDIGO 2012, clinical-reference F8)', () => {
	it('fires at and just past a 0.3 mg/dL rise and is quiet just before', () => {
		expect(status('creatinine-unstable', { creatinineRise48hMgDl: 0.29 })).toBe('quiet');
		expect(status('creatinine-unstable', { creatinineRise48hMgDl: 0.3 })).toBe('holds');
		expect(status('creatinine-unstable', { creatinineRise48hMgDl: 0.31 })).toBe('holds');
	});
	it('fires on a fall of the same size (recovery)', () => {
		expect(status('creatinine-unstable', { creatinineFall48hMgDl: 0.29 })).toBe('quiet');
		expect(status('creatinine-unstable', { creatinineFall48hMgDl: 0.3 })).toBe('holds');
	});
	it('shows kinetic GFR in its finding', () => {
		expect(run('creatinine-unstable', { creatinineRise48hMgDl: 0.6, kineticGfrMlMin: 41.2 }).finding).toMatch(/kinetic GFR 41\.2\s?mL\/min/u);
	});
});

describe('on dialysis — no AKI or unstable-creatinine finding from session swings (KDIGO 2012 stages AKI, not an established dialysis programme)', () => {
	it('is quiet for AKI, unstable creatinine and possible ARC while on intermittent haemodialysis', () => {
		const dialysis = { renalReplacement: 'ihd' as const, kdigoStage: 3, creatinineRise48hMgDl: 4, creatinineFall48hMgDl: 4.5, crclMlMin: 140 };
		expect(status('aki', dialysis)).toBe('quiet');
		expect(status('creatinine-unstable', dialysis)).toBe('quiet');
		expect(status('possible-arc', dialysis)).toBe('quiet');
	});
});

describe('dose-above-band in the full-dose range — no renal cut (common practice; issue "Safe proposals")', () => {
	it('is quiet when the regimen held against is the agent’s full one, whatever the ratio', () => {
		expect(status('dose-above-band', { doseBandRatio: 2, referenceUnadjusted: true })).toBe('quiet');
		expect(status('dose-above-band', { doseBandRatio: 2, referenceUnadjusted: false })).toBe('holds');
	});
	it('is quiet for a route the agent is not absorbed by (oral vancomycin)', () => {
		expect(status('dose-above-band', { doseBandRatio: 2, systemic: false })).toBe('quiet');
	});
});

describe('above-usual-maximum — low severity, check the indication (common practice)', () => {
	it('fires only when the daily dose is above the usual maximum, at low severity', () => {
		expect(status('above-usual-maximum', { aboveUsualMax: false })).toBe('quiet');
		expect(status('above-usual-maximum', { aboveUsualMax: true, dailyDoseMg: 6000, usualMaxDailyDoseMg: 4000 })).toBe('holds');
		expect(severity('above-usual-maximum', { aboveUsualMax: true })).toBe('low');
		expect(run('above-usual-maximum', { aboveUsualMax: true }).finding).toContain('check the indication');
	});
});

describe('no-regimen-for-renal-function — never silent where the library has no regimen (issue "Safe proposals")', () => {
	it('fires when the bands stop above today’s renal function or mark the agent not recommended', () => {
		expect(
			status('no-regimen-for-renal-function', { regimenStatus: 'none', regimenReason: 'no regimen for this renal function in the library', fullDoseRatio: 0.5 })
		).toBe('holds');
		expect(status('no-regimen-for-renal-function', { regimenStatus: 'avoid', fullDoseRatio: 0.5 })).toBe('holds');
		expect(status('no-regimen-for-renal-function', { regimenStatus: 'regimen' })).toBe('quiet');
		expect(status('no-regimen-for-renal-function', { regimenStatus: 'level-guided' })).toBe('quiet');
		expect(status('no-regimen-for-renal-function', { regimenStatus: 'not-applicable' })).toBe('quiet');
	});
	it('is high for a full dose (within tolerance of the top band) and moderate for a reduced one', () => {
		expect(severity('no-regimen-for-renal-function', { regimenStatus: 'none', fullDoseRatio: 1 })).toBe('high');
		expect(severity('no-regimen-for-renal-function', { regimenStatus: 'none', fullDoseRatio: 1 / 1.2 })).toBe('high');
		expect(severity('no-regimen-for-renal-function', { regimenStatus: 'none', fullDoseRatio: 0.8 })).toBe('moderate');
	});
	it('is quiet for agents the library does not adjust for renal function', () => {
		expect(status('no-regimen-for-renal-function', { regimenStatus: 'none', renallyAdjusted: false })).toBe('quiet');
	});
});

describe("trough-above-limit — predicted trough above the agent's limit (agent library values, from memory)", () => {
	const limited = { troughMaxMgL: 20 };
	it('is quiet just before and at the limit, fires just past it', () => {
		expect(status('trough-above-limit', { ...limited, troughMgL: 19.9 })).toBe('quiet');
		expect(status('trough-above-limit', { ...limited, troughMgL: 20 })).toBe('quiet');
		expect(status('trough-above-limit', { ...limited, troughMgL: 20.01 })).toBe('holds');
	});
	it('is indeterminate for agents without a trough limit', () => {
		expect(status('trough-above-limit', { troughMgL: 50, troughMaxMgL: null })).toBe('indeterminate');
	});
});

describe('vancomycin-auc-outside-target — AUC24 400–600 mg·h/L (Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864, from memory)', () => {
	const vanc = { model: 'vancomycin' as const };
	it('is quiet at and inside 400, fires just below it', () => {
		expect(status('vancomycin-auc-outside-target', { ...vanc, auc24MgHL: 400.1 })).toBe('quiet');
		expect(status('vancomycin-auc-outside-target', { ...vanc, auc24MgHL: 400 })).toBe('quiet');
		expect(status('vancomycin-auc-outside-target', { ...vanc, auc24MgHL: 399.9 })).toBe('holds');
		expect(severity('vancomycin-auc-outside-target', { ...vanc, auc24MgHL: 399.9 })).toBe('moderate');
	});
	it('is quiet at 600, fires just above it with high severity', () => {
		expect(status('vancomycin-auc-outside-target', { ...vanc, auc24MgHL: 599.9 })).toBe('quiet');
		expect(status('vancomycin-auc-outside-target', { ...vanc, auc24MgHL: 600 })).toBe('quiet');
		expect(status('vancomycin-auc-outside-target', { ...vanc, auc24MgHL: 600.1 })).toBe('holds');
		expect(severity('vancomycin-auc-outside-target', { ...vanc, auc24MgHL: 600.1 })).toBe('high');
	});
	it('applies to vancomycin only', () => {
		expect(status('vancomycin-auc-outside-target', { model: 'generic', auc24MgHL: 900 })).toBe('quiet');
	});
});

describe('tuned thresholds', () => {
	it('moves the threshold when the parameter changes', () => {
		const stricter = { ...rule('possible-arc'), params: { ...rule('possible-arc').params, arcCrclMlMin: 120 } };
		expect(evaluateRule(stricter, quietFacts({ crclMlMin: 119.9 })).status).toBe('quiet');
		expect(evaluateRule(stricter, quietFacts({ crclMlMin: 120 })).status).toBe('holds');
		expect(evaluateRule(rule('possible-arc'), quietFacts({ crclMlMin: 120 })).status).toBe('quiet');
	});
	it('leaves disabled rules out of a rule-set evaluation', () => {
		const rules = DEFAULT_RULES.map((r) => (r.key === 'possible-arc' ? { ...r, enabled: false } : r));
		expect(evaluateRules(rules, quietFacts({ crclMlMin: 150 })).map((o) => o.key)).not.toContain('possible-arc');
	});
});

describe('one tolerance (common practice: ±20 % by default, tuned by the administrator)', () => {
	it("the rule set's tolerance is the dose-above-band rule's, and the default when absent", async () => {
		const { bandToleranceOf } = await import('../../../src/lib/rules');
		expect(bandToleranceOf(DEFAULT_RULES)).toBe(0.2);
		const tuned = DEFAULT_RULES.map((r) => (r.key === 'dose-above-band' ? { ...r, params: { ...r.params, bandTolerance: 0.35 } } : r));
		expect(bandToleranceOf(tuned)).toBe(0.35);
		expect(bandToleranceOf(DEFAULT_RULES.filter((r) => r.key !== 'dose-above-band'))).toBe(0.2);
	});
});
