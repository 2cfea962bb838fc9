// The patient view's measured levels: an order with doses given and two vancomycin levels stored gets, on the
// fly, the patient's own clearance (away from the population prior, towards the clearance the levels were
// drawn from), the AUC24 now and a regimen to the window; the projection uses those kinetics and says so.
// Without levels it stays the population estimate.
import { desc, eq, sql } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { assessments } from '../../../../src/lib/server/db/schema';
import { reassessOrders } from '../../../../src/lib/server/reassess';
import { getDb } from '../../../../src/lib/server/db';
import { patients } from '../../../../src/lib/server/patients';
import { seedDefaultVersion } from '../../../../src/lib/server/rules';
import { uniqueTag } from '../../../fixtures/board';
import { createVancomycinWithLevels, TRUE_CLEARANCE_L_PER_H } from '../../../fixtures/measured-levels';

/** the projection of the order's own regimens (nothing typed in) */
const only = (order: string) => ({ order, dose: undefined, interval: undefined, infusion: undefined });

beforeAll(async () => {
	await seedDefaultVersion();
});

describe('measured levels in the projection', () => {
	it('fits two vancomycin levels: own clearance, AUC24 now and a proposal to the window', async () => {
		const p = await createVancomycinWithLevels(getDb(), uniqueTag());
		const result = await patients.projection(p.patientId, only(p.orderId));
		if (!result.ok) throw new Error(result.error);
		const { levels, kineticsBasis, series } = result.projection;
		expect(kineticsBasis).toBe('individual');
		expect(levels).not.toBeNull();
		const v = levels!;
		expect(v.agentKind).toBe('vancomycin');
		expect(v.basis).toBe('individual');
		expect(v.levels.map((l) => [l.timing, l.fitted])).toEqual([
			['trough', true],
			['peak', true]
		]);
		// prior from CrCl ≈ 80 mL/min (CL ≈ 5 L/h); the levels come from a patient clearing 2.5 L/h
		const prior = v.prior!.clearanceLPerH;
		const own = v.individual!.clearanceLPerH;
		expect(prior).toBeGreaterThan(4.5);
		expect(own).toBeLessThan(prior * 0.85);
		expect(Math.abs(own - TRUE_CLEARANCE_L_PER_H)).toBeLessThan(Math.abs(prior - TRUE_CLEARANCE_L_PER_H));
		// 2000 mg a day over the own clearance
		expect(v.auc24NowMgHL).toBeCloseTo(2000 / own, 6);
		expect(v.auc24NowMgHL!).toBeGreaterThan(600);
		const [low, high] = v.aucWindowMgHL!;
		expect(v.proposal).not.toBeNull();
		const proposedAuc = (v.proposal!.doseMg * 24) / v.proposal!.intervalH / own;
		expect(proposedAuc).toBeGreaterThanOrEqual(low);
		expect(proposedAuc).toBeLessThanOrEqual(high);
		expect(v.statement).toMatch(/2 levels moved clearance/);
		expect(v.objective!.atMap).toBeLessThan(v.objective!.atPrior);
		for (const l of v.levels) expect(Math.abs(l.residualMgL!)).toBeLessThan(Math.abs(l.mgL - l.predictedPriorMgL!) + 1e-9);
		expect(v.trace.map((s) => s.key)).toEqual(expect.arrayContaining(['levelPriorClearance', 'levelMapClearance', 'levelAuc24Current', 'levelProposal']));
		// the chart: curves of the doses given (own and population) and the proposal's from the next dose
		expect(v.curves!.individual.length).toBeGreaterThan(10);
		expect(v.curves!.population.length).toBe(v.curves!.individual.length);
		expect(v.curves!.proposal.length).toBeGreaterThan(10);
		// the projection panel draws with the own kinetics and the proposal from them
		const current = series.find((s) => s.key === 'current')!;
		expect(current.kinetics.clearanceLPerH).toBeCloseTo(own, 9);
		expect(current.label).toMatch(/own kinetics from levels/);
		const proposed = series.find((s) => s.key === 'proposed')!;
		expect(proposed.regimen).toEqual({ doseMg: v.proposal!.doseMg, intervalH: v.proposal!.intervalH, infusionH: v.proposal!.infusionH });
	});

	it('marks a level drawn before the first dose as not fitted, with the reason', async () => {
		const p = await createVancomycinWithLevels(getDb(), uniqueTag(), { withEarlyLevel: true });
		const result = await patients.projection(p.patientId, only(p.orderId));
		if (!result.ok) throw new Error(result.error);
		const v = result.projection.levels!;
		expect(v.levels).toHaveLength(3);
		const early = v.levels[0];
		expect(early.fitted).toBe(false);
		expect(early.excludedReason).toBe('drawn before the first dose');
		expect(v.levels.slice(1).every((l) => l.fitted)).toBe(true);
	});

	it('stays the population estimate without levels, and says what is missing', async () => {
		const p = await createVancomycinWithLevels(getDb(), uniqueTag(), { noLevels: true });
		const result = await patients.projection(p.patientId, only(p.orderId));
		if (!result.ok) throw new Error(result.error);
		expect(result.projection.kineticsBasis).toBe('population');
		const v = result.projection.levels!;
		expect(v.basis).toBe('population');
		expect(v.levels).toEqual([]);
		expect(v.individual).toBeNull();
		expect(v.noFitReason).toBe('no level has been measured for this order');
		expect(result.projection.series.find((s) => s.key === 'current')!.label).toMatch(/kinetics now$/);
	});

	it('agrees with the assessment the board reads: the same own clearance and the rule set’s AUC window, and no fit on dialysis', async () => {
		const db = getDb();
		const p = await createVancomycinWithLevels(db, uniqueTag());
		await reassessOrders([p.orderId]);
		const newest = async () =>
			(
				await db
					.select({ id: assessments.id, result: assessments.result })
					.from(assessments)
					.where(eq(assessments.orderId, p.orderId))
					.orderBy(desc(assessments.at))
					.limit(1)
			)[0];
		const stored = (await newest()).result.measured!;
		expect(stored.individual).not.toBeNull();
		const first = await patients.projection(p.patientId, only(p.orderId));
		if (!first.ok) throw new Error(first.error);
		expect(first.projection.levels!.individual!.clearanceLPerH).toBeCloseTo(stored.individual!.clearanceLPerH, 2);
		expect(first.projection.levels!.aucWindowMgHL).toEqual(stored.aucWindowMgHL);

		// a window the administrator narrowed, as kept with the assessment, is the one the page aims at
		const { id } = await newest();
		await db.execute(sql`update assessments set result = jsonb_set(result, '{measured,aucWindowMgHL}', '[300, 420]') where id = ${id}`);
		const narrowed = await patients.projection(p.patientId, only(p.orderId));
		if (!narrowed.ok) throw new Error(narrowed.error);
		const v = narrowed.projection.levels!;
		expect(v.aucWindowMgHL).toEqual([300, 420]);
		const proposedAuc = (v.proposal!.doseMg * 24) / v.proposal!.intervalH / v.individual!.clearanceLPerH;
		expect(proposedAuc).toBeGreaterThanOrEqual(300);
		expect(proposedAuc).toBeLessThanOrEqual(420);

		// on dialysis the assessment makes no Bayesian estimate, and neither does the page
		await db.execute(sql`update assessments set result = jsonb_set(result, '{renal,renalReplacement}', '"ihd"') where id = ${id}`);
		const dialysis = await patients.projection(p.patientId, only(p.orderId));
		if (!dialysis.ok) throw new Error(dialysis.error);
		expect(dialysis.projection.kineticsBasis).toBe('population');
		expect(dialysis.projection.levels!.noFitReason).toMatch(/renal replacement therapy/);
	});
});
