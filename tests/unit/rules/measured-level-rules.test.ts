// The measured-level rules at their thresholds, just past and just before. Strict inequalities ("above the
// limit", "outside 400–600", "more than twice") are quiet at the boundary itself and fire just past it.
import { describe, expect, it } from 'vitest';
import { aucWindowOf, DEFAULT_RULES, defaultRules, evaluateRule, PARAM_SPECS, type Facts } from '../../../src/lib/rules';
import { quietFacts } from './helpers';

const rule = (key: string) => {
	const found = DEFAULT_RULES.find((r) => r.key === key);
	if (!found) throw new Error(`no default rule ${key}`);
	return found;
};
const run = (key: string, overrides: Partial<Facts>) => evaluateRule(rule(key), quietFacts(overrides));
/** the formatting layer puts a narrow no-break space between number and unit */
const q = (text: string) => text.replace(/ /g, '\u202f');
const status = (key: string, overrides: Partial<Facts>) => run(key, overrides).status;

const gentamicin: Partial<Facts> = {
	agentName: 'Gentamicin',
	agentClass: 'aminoglycoside',
	model: 'aminoglycoside',
	troughMaxMgL: 1,
	dosedByLevels: true,
	measuredLevelCount: 2
};
const vancomycin: Partial<Facts> = { agentName: 'Vancomycin', agentClass: 'glycopeptide', model: 'vancomycin', dosedByLevels: true, measuredLevelCount: 2 };

describe("aminoglycoside-measured-trough-above-limit — the agent's trough limit (agent library)", () => {
	it('is quiet at the limit, fires just past it, at high severity', () => {
		expect(status('aminoglycoside-measured-trough-above-limit', { ...gentamicin, measuredTroughMgL: 1 })).toBe('quiet');
		expect(status('aminoglycoside-measured-trough-above-limit', { ...gentamicin, measuredTroughMgL: 1.01 })).toBe('holds');
		expect(run('aminoglycoside-measured-trough-above-limit', { ...gentamicin, measuredTroughMgL: 1.01 }).severity).toBe('high');
	});
	it('names the measured trough, its age and the limit', () => {
		const finding = run('aminoglycoside-measured-trough-above-limit', { ...gentamicin, measuredTroughMgL: 2.4, measuredTroughAgeH: 5 }).finding;
		expect(finding).toContain(q('2.4 mg/L'));
		expect(finding).toContain(`${q('5 h')} ago`);
		expect(finding).toContain(q('1 mg/L'));
		expect(finding).toContain('Gentamicin');
	});
	it('is indeterminate without a measured trough and quiet for other agents', () => {
		expect(status('aminoglycoside-measured-trough-above-limit', { ...gentamicin, measuredTroughMgL: null })).toBe('indeterminate');
		expect(status('aminoglycoside-measured-trough-above-limit', { ...vancomycin, troughMaxMgL: null, measuredTroughMgL: 30 })).toBe('quiet');
	});
});

describe('vancomycin-measured-trough-high — above 20 mg/L (Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864)', () => {
	it('defaults to 20 mg/L with its source', () => {
		expect(PARAM_SPECS.vancomycinTroughMaxMgL.defaultValue).toBe(20);
		expect(PARAM_SPECS.vancomycinTroughMaxMgL.source).toContain('Rybak');
	});
	it('is quiet at 20, fires just past it, for vancomycin only', () => {
		expect(status('vancomycin-measured-trough-high', { ...vancomycin, measuredTroughMgL: 20 })).toBe('quiet');
		expect(status('vancomycin-measured-trough-high', { ...vancomycin, measuredTroughMgL: 20.1 })).toBe('holds');
		expect(status('vancomycin-measured-trough-high', { ...gentamicin, measuredTroughMgL: 25 })).toBe('quiet');
	});
	it('moves with its parameter', () => {
		const stricter = { ...rule('vancomycin-measured-trough-high'), params: { vancomycinTroughMaxMgL: 15 } };
		expect(evaluateRule(stricter, quietFacts({ ...vancomycin, measuredTroughMgL: 15.5 })).status).toBe('holds');
	});
});

describe('vancomycin-measured-auc-outside-window — 400–600 mg·h/L (Rybak 2020), a rule parameter', () => {
	it('is quiet at 400 and 600, fires just outside, high above the window', () => {
		const key = 'vancomycin-measured-auc-outside-window';
		expect(status(key, { ...vancomycin, measuredAuc24MgHL: 400 })).toBe('quiet');
		expect(status(key, { ...vancomycin, measuredAuc24MgHL: 399.9 })).toBe('holds');
		expect(run(key, { ...vancomycin, measuredAuc24MgHL: 399.9 }).severity).toBe('moderate');
		expect(status(key, { ...vancomycin, measuredAuc24MgHL: 600 })).toBe('quiet');
		expect(run(key, { ...vancomycin, measuredAuc24MgHL: 600.1 }).severity).toBe('high');
		expect(status(key, { ...vancomycin, measuredAuc24MgHL: null })).toBe('indeterminate');
	});
	it('supersedes the population AUC finding when levels give an AUC', () => {
		const facts = { ...vancomycin, auc24MgHL: 300 };
		expect(status('vancomycin-auc-outside-target', { ...facts, measuredAuc24MgHL: null })).toBe('holds');
		expect(status('vancomycin-auc-outside-target', { ...facts, measuredAuc24MgHL: 480 })).toBe('quiet');
	});
	it("gives the assessment's proposal its window (aucWindowOf), and none when the rule is gone", () => {
		expect(aucWindowOf(DEFAULT_RULES)).toEqual([400, 600]);
		const tuned = defaultRules().map((r) => (r.key === 'vancomycin-measured-auc-outside-window' ? { ...r, params: { aucLowMgHL: 450, aucHighMgHL: 550 } } : r));
		expect(aucWindowOf(tuned)).toEqual([450, 550]);
		expect(aucWindowOf(DEFAULT_RULES.filter((r) => r.key !== 'vancomycin-measured-auc-outside-window'))).toBeUndefined();
	});
});

describe('level-due — an intravenous level-dosed order running longer than 72 h with no level (common practice)', () => {
	const due = { ...vancomycin, measuredLevelCount: 0 };
	it('is quiet at 72 h, fires just past it', () => {
		expect(status('level-due', { ...due, orderAgeH: 72 })).toBe('quiet');
		expect(status('level-due', { ...due, orderAgeH: 72.1 })).toBe('holds');
		expect(run('level-due', { ...due, orderAgeH: 80 }).finding).toContain('Vancomycin');
	});
	it('is quiet once a level exists, for agents not dosed from levels, and by mouth', () => {
		expect(status('level-due', { ...due, orderAgeH: 100, measuredLevelCount: 1 })).toBe('quiet');
		expect(status('level-due', { ...due, orderAgeH: 100, dosedByLevels: false })).toBe('quiet');
		expect(status('level-due', { ...due, orderAgeH: 100, route: 'po' })).toBe('quiet');
	});
	it('is indeterminate when the assessment did not look at levels (older assessments)', () => {
		expect(status('level-due', { ...due, orderAgeH: 100, measuredLevelCount: null })).toBe('indeterminate');
	});
});

describe('measured-trough-disagrees — more than 2× either way from the population prediction (common practice)', () => {
	const key = 'measured-trough-disagrees';
	it('is quiet at 2× and ½×, fires past either', () => {
		expect(status(key, { ...vancomycin, measuredTroughRatio: 2 })).toBe('quiet');
		expect(status(key, { ...vancomycin, measuredTroughRatio: 2.01 })).toBe('holds');
		expect(status(key, { ...vancomycin, measuredTroughRatio: 0.5 })).toBe('quiet');
		expect(status(key, { ...vancomycin, measuredTroughRatio: 0.49 })).toBe('holds');
		expect(status(key, { ...vancomycin, measuredTroughRatio: 1.2 })).toBe('quiet');
	});
	it('names the measured and predicted troughs', () => {
		const finding = run(key, { ...gentamicin, measuredTroughMgL: 3, measuredTroughPredictedMgL: 0.8, measuredTroughRatio: 3.75 }).finding;
		expect(finding).toContain(q('3 mg/L'));
		expect(finding).toContain(q('0.8 mg/L'));
	});
});

describe('the population trough finding', () => {
	it('gives way to a measured trough', () => {
		const facts = { ...gentamicin, troughMgL: 2 };
		expect(status('trough-above-limit', { ...facts, measuredTroughMgL: null })).toBe('holds');
		expect(status('trough-above-limit', { ...facts, measuredTroughMgL: 0.5 })).toBe('quiet');
	});
});
