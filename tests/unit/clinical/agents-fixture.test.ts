// The agent library seed (fixtures/agents.json): structure, sane example values, and every agent through
// assess() on standard patients. Values are demonstration data (clinical-reference §5), not clinical advice.
import { describe, expect, it } from 'vitest';
import { assess, findBand, PRACTICAL_INTERVALS_H, type AgentParams, type AssessInput } from '../../../src/lib/clinical';
import agentsFile from '../../../fixtures/agents.json';
import { expectClose } from './helpers';

type FixtureAgent = AgentParams & {
	atcCode: string;
	rxnormCode: string | null;
	synonyms: string[];
	agentClass: string;
	provenance: Record<string, string>;
};

const agents = agentsFile.agents as unknown as FixtureAgent[];
const TAGS = ['L', 'Ls', 'S', 'P', 'M', 'CP'];
const CLASSES = [
	'glycopeptide',
	'aminoglycoside',
	'beta-lactam/penicillin',
	'cephalosporin',
	'carbapenem',
	'fluoroquinolone',
	'antifungal',
	'antiviral',
	'lipopeptide',
	'oxazolidinone',
	'polymyxin',
	'sulfonamide'
];
const PARAMS = ['fe', 'proteinBinding', 'vdLPerKg', 'halfLifeNormalH', 'renalBands'];

const at = new Date('2025-03-10T08:00:00Z');
const hoursBefore = (h: number) => new Date(at.getTime() - h * 3_600_000);

/** male, 40 y, 175 cm, 75 kg (IBW 70.46 → dosing weight IBW), albumin 40 g/L */
function standardPatient(agent: AgentParams, scrMgDl: number): AssessInput {
	const basisWeight = agent.vdWeightBasis === 'actual' ? 75 : 70.4646;
	return {
		at,
		patient: { ageYears: 40, sex: 'male', heights: [{ at: hoursBefore(30), cm: 175 }], weights: [{ at: hoursBefore(30), kg: 75 }] },
		creatinine: [
			{ at: hoursBefore(40), creatinine: { value: scrMgDl, unit: 'mg/dL' } },
			{ at: hoursBefore(4), creatinine: { value: scrMgDl, unit: 'mg/dL' } }
		],
		albumin: [
			{ at: hoursBefore(40), gL: 40 },
			{ at: hoursBefore(4), gL: 40 }
		],
		agent,
		order: {
			doseMg: agent.usualDoseMg ?? (agent.usualDoseMgPerKg as number) * basisWeight,
			intervalH: agent.usualIntervalH,
			infusionH: agent.usualInfusionH,
			route: 'iv',
			startAt: hoursBefore(24)
		}
	};
}

describe('fixtures/agents.json structure', () => {
	it('carries the review note and about twenty agents with unique ATC codes', () => {
		expect(agentsFile.note).toBe('Example parameters for demonstration; must be reviewed by the institution before clinical use.');
		expect(agents.length).toBeGreaterThanOrEqual(18);
		expect(new Set(agents.map((a) => a.code)).size).toBe(agents.length);
	});

	it.each(agents.map((a) => [a.name, a] as const))('%s: identifiers, class, synonyms, provenance', (_name, a) => {
		expect(a.code).toMatch(/^J0[125][A-Z]{2}\d{2}$/); // ATC: systemic anti-infectives (J01 antibacterials, J02, J05)
		expect(a.atcCode).toBe(a.code);
		if (a.rxnormCode !== null) expect(a.rxnormCode).toMatch(/^\d+$/);
		expect(CLASSES).toContain(a.agentClass);
		expect(a.synonyms.length).toBeGreaterThan(0);
		for (const key of PARAMS) expect(TAGS, `${a.name}.provenance.${key}`).toContain(a.provenance[key]);
		for (const [key, tag] of Object.entries(a.provenance)) if (key !== 'note') expect(TAGS).toContain(tag);
		if (a.rxnormCode !== null) expect(a.provenance.rxnormCode).toBe('M'); // RxNorm codes are from memory
		expect(a.provenance.note.length).toBeGreaterThan(10);
	});

	it.each(agents.map((a) => [a.name, a] as const))('%s: sane kinetic values and regimen', (_name, a) => {
		expect(a.fe).toBeGreaterThanOrEqual(0);
		expect(a.fe).toBeLessThanOrEqual(1);
		expect(a.proteinBinding).toBeGreaterThanOrEqual(0);
		expect(a.proteinBinding).toBeLessThan(1);
		expect(a.vdLPerKg).toBeGreaterThan(0.05);
		expect(a.vdLPerKg).toBeLessThanOrEqual(3);
		expect(a.halfLifeNormalH).toBeGreaterThan(0.3);
		expect(a.halfLifeNormalH).toBeLessThanOrEqual(100);
		expect((a.usualDoseMg === null) !== (a.usualDoseMgPerKg === null)).toBe(true);
		expect(PRACTICAL_INTERVALS_H as readonly number[]).toContain(a.usualIntervalH);
		expect(a.usualInfusionH).toBeLessThanOrEqual(a.usualIntervalH);
		expect(a.albuminRefGL).toBe(40);
		expect(a.bioavailability).toBeGreaterThanOrEqual(0);
		expect(a.bioavailability).toBeLessThanOrEqual(1);
		expect(a.maxCreatinineAgeH).toBeGreaterThanOrEqual(24);
		if (a.nephrotoxic) expect(a.maxCreatinineAgeH).toBeLessThanOrEqual(48);
	});

	it.each(agents.map((a) => [a.name, a] as const))('%s: renal bands do not overlap and say what they are', (_name, a) => {
		expect(a.renalBands.length).toBeGreaterThan(0);
		for (let crcl = 0; crcl <= 200; crcl += 0.5) {
			const matches = a.renalBands.filter((b) => findBand([b], crcl) !== null);
			expect(matches.length, `CrCl ${crcl}`).toBeLessThanOrEqual(1);
		}
		for (const b of a.renalBands) {
			const fixed = (b.doseMg !== null || b.doseMgPerKg !== null) && b.intervalH !== null;
			if (!fixed) expect(b.note, 'a band without a fixed dose carries a note').toBeTruthy();
			if (b.intervalH !== null) expect(PRACTICAL_INTERVALS_H as readonly number[]).toContain(b.intervalH);
		}
	});

	it('targets: vancomycin AUC 400–600 and loading 20–35 mg/kg up to 3,000 mg (Rybak 2020), no trough target; aminoglycoside trough limits', () => {
		// Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864: AUC-guided dosing replaces trough-only targets
		const by = (n: string) => agents.find((a) => a.name === n)!;
		expect(by('Vancomycin').aucTargetMgHL).toEqual([400, 600]);
		expect(by('Vancomycin').troughMaxMgL).toBeNull();
		expect(by('Vancomycin').loadingTargetMgL).toBe(25);
		expect([by('Vancomycin').loadingMinMgPerKg, by('Vancomycin').loadingMaxMgPerKg, by('Vancomycin').loadingMaxMg]).toEqual([20, 35, 3000]);
		// extended-interval aminoglycoside dosing: the first dose is the full dose, no separate loading dose (common practice)
		for (const n of ['Gentamicin', 'Tobramycin', 'Amikacin']) expect(by(n).loadingTargetMgL).toBeNull();
		expect(by('Gentamicin').troughMaxMgL).toBe(1);
		expect(by('Tobramycin').troughMaxMgL).toBe(1);
		expect(by('Amikacin').troughMaxMgL).toBe(5);
		for (const a of agents) if (!['glycopeptide', 'aminoglycoside'].includes(a.agentClass)) expect(a.loadingTargetMgL).toBeNull();
	});
});

describe('every agent through assess()', () => {
	it.each(agents.map((a) => [a.name, a] as const))('%s: normal renal function (CrCl 108.7) — complete, usual regimen within its band', (_name, a) => {
		// CG = (140 − 40) × 70.465 / (72 × 0.9) = 108.74 mL/min; albumin at the reference 40 g/L
		const r = assess(standardPatient(a, 0.9));
		expect(r.complete, r.missing.join(', ')).toBe(true);
		expectClose(r.renal.crclMlMin!, 108.74);
		const now = r.kinetics.now!;
		expect(now.halfLifeH).toBeGreaterThan(0);
		expect(r.kinetics.peakMgL!).toBeGreaterThan(r.kinetics.troughMgL!);
		expect(r.kinetics.troughMgL!).toBeGreaterThan(0);
		expect(r.kinetics.auc24MgHL!).toBeGreaterThan(0);
		if (a.model === 'generic') {
			// CrCl above normal (100) and albumin at reference: Q = 1, so t½ equals the tabulated normal t½
			expectClose(now.halfLifeH, a.halfLifeNormalH);
		} else {
			expect(now.halfLifeH / a.halfLifeNormalH).toBeGreaterThan(0.5);
			expect(now.halfLifeH / a.halfLifeNormalH).toBeLessThan(3);
		}
		// AUC-guided agents have no band daily dose to compare with; the AUC rule judges them
		expect(r.dosing.comparedToBand).toBe(a.aucTargetMgHL !== null ? 'unknown' : 'within');
		expect(r.dosing.proposed).not.toBeNull();
		// the order started 24 h ago and is past its second dose: no loading dose
		expect(r.dosing.proposed!.loadingDoseMg).toBeNull();
	});

	it.each(agents.map((a) => [a.name, a] as const))('%s: impaired (SCr 3.0, CrCl 32.6) — t½ longer, proposal never above the usual daily dose', (_name, a) => {
		// CG = 100 × 70.465 / (72 × 3.0) = 32.62 mL/min
		const normal = assess(standardPatient(a, 0.9));
		const r = assess(standardPatient(a, 3.0));
		expectClose(r.renal.crclMlMin!, 32.623);
		if (a.fe >= 0.3) expect(r.kinetics.now!.halfLifeH).toBeGreaterThan(normal.kinetics.now!.halfLifeH);
		const usualDaily = ((a.usualDoseMg ?? (a.usualDoseMgPerKg as number) * (a.vdWeightBasis === 'actual' ? 75 : 70.4646)) * 24) / a.usualIntervalH;
		const p = r.dosing.proposed;
		if (p !== null) expect((p.doseMg * 24) / p.intervalH).toBeLessThanOrEqual(usualDaily * 1.1); // rounding slack
	});
});
