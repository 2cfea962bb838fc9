// The invented Larkspur Bay Hospital: deterministic, adult, plausible, and accepted by the feed's own
// checks without a single rejection.
import { describe, expect, it } from 'vitest';
import { albuminAt, creatinineAt, generateHospital, planFor, SEED_PATIENTS } from '../../../../src/lib/server/demo';
import { LEVEL_CODES, parseEntries } from '../../../../src/lib/server/feed';
import type { AdministrationRecord, LevelRecord, OrderRecord, PatientRecord, ResultRecord } from '../../../../src/lib/server/feed';
import { fixtureIndex } from '../feed/helpers';

const now = new Date('2026-11-30T09:30:00Z');
const hospital = generateHospital(now);
const parsed = parseEntries(
	hospital.bundles.flatMap((b) => b.entry),
	{ now, agents: fixtureIndex() }
);

describe('generateHospital', () => {
	it('is deterministic for a given time', () => {
		expect(JSON.stringify(generateHospital(now).bundles)).toBe(JSON.stringify(hospital.bundles));
	});
	it('has about 120 inpatients and 150 active orders over the agent library, every entry valid', () => {
		expect(parsed.rejections).toEqual([]);
		const kinds = (k: string) => parsed.records.filter((r) => r.kind === k);
		expect(kinds('patient')).toHaveLength(SEED_PATIENTS);
		expect(kinds('encounter')).toHaveLength(SEED_PATIENTS);
		expect(kinds('order').length).toBeGreaterThanOrEqual(140);
		expect(kinds('order').length).toBeLessThanOrEqual(160);
		const agentsUsed = new Set((kinds('order') as OrderRecord[]).map((o) => o.agentId));
		expect(agentsUsed.size).toBe(20);
	});
	it('describes adults with plausible results, at most seven days old, none in the future', () => {
		for (const p of parsed.records.filter((r): r is PatientRecord => r.kind === 'patient')) {
			const age = (now.getTime() - Date.parse(p.birthDate)) / (365.25 * 86_400_000);
			expect(age).toBeGreaterThanOrEqual(18);
		}
		for (const r of parsed.records.filter((x): x is ResultRecord => x.kind === 'result')) {
			expect(r.observedAt.getTime()).toBeLessThanOrEqual(now.getTime());
			expect(now.getTime() - r.observedAt.getTime()).toBeLessThanOrEqual(7 * 86_400_000 + 3_600_000);
		}
	});
	it('uses invented MRNs and names, one per patient', () => {
		const patients = parsed.records.filter((r): r is PatientRecord => r.kind === 'patient');
		expect(new Set(patients.map((p) => p.mrn)).size).toBe(patients.length);
		expect(patients.every((p) => /^LBH\d{7}$/.test(p.mrn))).toBe(true);
	});
});

describe('planned courses', () => {
	const plans = Array.from({ length: SEED_PATIENTS }, (_, i) => planFor(`lbh-p-${String(i + 1).padStart(4, '0')}`));

	it('gives each AKI patient a KDIGO-sized rise and a recovery (KDIGO 2012: ≥ 1.5 × baseline is stage 1)', () => {
		const aki = plans.filter((p) => p.scenario === 'aki');
		expect(aki.length).toBeGreaterThan(10);
		for (const p of aki) {
			const peakDay = (p.aki?.onsetDay ?? 0) + (p.aki?.riseDays ?? 0);
			expect(creatinineAt(p, peakDay) / p.baselineCreatinineMgDl).toBeGreaterThan(1.9);
			expect(creatinineAt(p, peakDay + 14) / p.baselineCreatinineMgDl).toBeLessThan(1.3);
		}
	});
	it('gives young trauma patients a low creatinine (augmented clearance) and septic patients a falling albumin', () => {
		for (const p of plans.filter((x) => x.scenario === 'arc')) {
			expect(p.ageYears).toBeLessThan(35);
			expect(creatinineAt(p, 3)).toBeLessThan(0.65);
		}
		for (const p of plans.filter((x) => x.scenario === 'sepsis')) expect(albuminAt(p, 6)).toBeLessThan(albuminAt(p, 0) - 8);
	});
	it('makes obese patients obese (BMI ≥ 35 kg/m²)', () => {
		for (const p of plans.filter((x) => x.scenario === 'obese')) expect(p.weightKg / (p.heightCm / 100) ** 2).toBeGreaterThanOrEqual(35);
	});
	it('holds vancomycin once a trough above 20 mg/L is back, so no level climbs for days unseen (common practice)', () => {
		const levels = parsed.records.filter((r): r is LevelRecord => r.kind === 'level' && LEVEL_CODES[r.loinc]?.agent === 'vancomycin');
		const administrations = parsed.records.filter((r): r is AdministrationRecord => r.kind === 'administration');
		const doses = administrations.filter((a) => a.status === 'completed');
		const orderOf = (sourceId: string) => sourceId.replace(/-(lv|ma)-\d+$/, '');
		expect(levels.length).toBeGreaterThan(20);
		for (const high of levels.filter((l) => l.timing === 'trough' && l.valueMgL > 20)) {
			const resultAt = high.observedAt.getTime() + 50 * 60_000;
			const later = doses.filter((d) => orderOf(d.sourceId) === orderOf(high.sourceId) && d.startAt.getTime() > resultAt);
			expect(later, high.sourceId).toEqual([]);
			// and the doses due meanwhile are on record as not given
			const held = administrations.filter((d) => orderOf(d.sourceId) === orderOf(high.sourceId) && d.status === 'not-done');
			expect(held.length, high.sourceId).toBeGreaterThan(0);
			expect(Math.min(...held.map((d) => d.startAt.getTime()))).toBeGreaterThanOrEqual(resultAt);
		}
		// the highest a demo vancomycin level reaches: an unadjusted regimen in CKD until its first trough
		expect(Math.max(...levels.map((l) => l.valueMgL))).toBeLessThan(80);
	});
	it('gives the same plan for the same id', () => {
		expect(planFor('lbh-s-202612011200-0')).toEqual(planFor('lbh-s-202612011200-0'));
	});
});
