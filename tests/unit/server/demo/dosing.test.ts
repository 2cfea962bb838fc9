// The demo's doses given and drug levels: doses a little late, levels at the times a pharmacist asks
// for them, each computed from a one-compartment model of the doses given (checked here against a
// numerical integration of the same model) with a little assay noise; deterministic.
import { describe, expect, it } from 'vitest';
import {
	concentrationAt,
	dosingDeliveries,
	drawnLevels,
	givenDoses,
	HOLD_ABOVE_TROUGH_MGL,
	HOLD_UNTIL_BELOW_MGL,
	LEVEL_TURNAROUND_MS,
	patientKinetics,
	recordsDoses,
	type DosedOrder,
	type GivenDose
} from '../../../../src/lib/server/demo/dosing';
import { planFor } from '../../../../src/lib/server/demo';
import { parseEntries } from '../../../../src/lib/server/feed';
import { fixtureIndex } from '../feed/helpers';

const HOUR_MS = 3_600_000;
const start = new Date('2026-11-20T09:00:00Z');
const until = new Date('2026-11-27T09:00:00Z');
const vanco = (sourceId: string): DosedOrder => ({
	sourceId,
	agentCode: 'J01XA01',
	route: 'iv',
	regimen: { doseMg: 1250, intervalH: 12, infusionH: 1.5 },
	startAt: start,
	stopAt: null
});
const genta = (sourceId: string): DosedOrder => ({ ...vanco(sourceId), agentCode: 'J01GB03', regimen: { doseMg: 400, intervalH: 24, infusionH: 0.5 } });
const plan = { sourceId: 'lbh-p-test', ageYears: 60, sex: 'male' as const, weightKg: 80 };

/** dC/dt = R(t)/V − (CL/V)·C by small Euler steps: an integration independent of the closed form. */
function integrate(doses: GivenDose[], kin: { clLH: number; vL: number }, at: Date): number {
	const dtH = 1 / 600;
	let c = 0;
	const t0 = doses[0].startAt.getTime();
	for (let t = t0; t < at.getTime(); t += dtH * HOUR_MS) {
		const rate = doses
			.filter((d) => t >= d.startAt.getTime() && t < d.endAt.getTime())
			.reduce((s, d) => s + d.doseMg / ((d.endAt.getTime() - d.startAt.getTime()) / HOUR_MS), 0);
		c += (rate / kin.vL - (kin.clLH / kin.vL) * c) * dtH;
	}
	return c;
}

describe('demo dosing', () => {
	it('records doses of IV vancomycin and aminoglycosides only', () => {
		expect(recordsDoses(vanco('a'))).toBe(true);
		expect(recordsDoses(genta('a'))).toBe(true);
		expect(recordsDoses({ ...vanco('a'), route: 'po' })).toBe(false);
		expect(recordsDoses({ ...vanco('a'), agentCode: 'J01DH02' })).toBe(false);
	});

	it('gives every dose up to the stop, each 0–24 min late, infused for the ordered time (+ up to 7 min)', () => {
		const doses = givenDoses({ ...vanco('rx-1'), stopAt: new Date('2026-11-23T09:00:00Z') }, until);
		expect(doses).toHaveLength(6);
		doses.forEach((d, k) => {
			const late = d.startAt.getTime() - (start.getTime() + k * 12 * HOUR_MS);
			expect(late).toBeGreaterThanOrEqual(0);
			expect(late).toBeLessThan(25 * 60_000);
			const runH = (d.endAt.getTime() - d.startAt.getTime()) / HOUR_MS;
			expect(runH).toBeGreaterThanOrEqual(1.5);
			expect(runH).toBeLessThan(1.5 + 8 / 60);
		});
	});

	it('computes concentrations by superposition that agree with a numerical integration of the model', () => {
		const doses = givenDoses(vanco('rx-2'), until);
		const kin = { clLH: 4, vL: 56 };
		for (const h of [0.5, 1.5, 11.5, 37.7, 100]) {
			const at = new Date(start.getTime() + h * HOUR_MS);
			const given = doses.filter((d) => d.endAt <= at || d.startAt < at);
			expect(concentrationAt(doses, kin, at)).toBeCloseTo(integrate(given, kin, at), 1);
		}
	});

	it('draws vancomycin troughs 30 min before a dose, peaks 30–60 min after an infusion, near the model', () => {
		const withLevels = Array.from({ length: 40 }, (_, i) => vanco(`rx-v-${i}`)).filter(
			(o) => drawnLevels(o, givenDoses(o, until), { clLH: 4, vL: 56 }, until).length > 0
		);
		expect(withLevels.length).toBeGreaterThan(15);
		expect(withLevels.length).toBeLessThan(35);
		let peaks = 0;
		for (const order of withLevels) {
			const doses = givenDoses(order, until);
			const kin = patientKinetics(plan, 1.0, order);
			for (const level of drawnLevels(order, doses, kin, until)) {
				if (level.timing === 'trough') {
					expect(doses.some((d) => d.startAt.getTime() - level.at.getTime() === 30 * 60_000)).toBe(true);
				} else {
					peaks++;
					const after = Math.min(...doses.filter((d) => d.endAt < level.at).map((d) => (level.at.getTime() - d.endAt.getTime()) / 60_000));
					expect(after).toBeGreaterThanOrEqual(30);
					expect(after).toBeLessThanOrEqual(60);
				}
				const model = concentrationAt(doses, kin, level.at);
				expect(Math.abs(level.mgL - model)).toBeLessThan(0.25 * model + 1);
			}
		}
		expect(peaks).toBeGreaterThan(0);
	});

	it('draws an aminoglycoside pair after one dose; the same order always gives the same levels', () => {
		const order = Array.from({ length: 20 }, (_, i) => genta(`rx-g-${i}`)).find(
			(o) => drawnLevels(o, givenDoses(o, until), { clLH: 5, vL: 21 }, until).length > 0
		) as DosedOrder;
		const kin = patientKinetics(plan, 1.0, order);
		const levels = drawnLevels(order, givenDoses(order, until), kin, until);
		expect(levels[0].timing).toBe('peak');
		expect(levels[1].timing).toBe('random');
		expect(levels[1].mgL).toBeLessThan(levels[0].mgL);
		expect(drawnLevels(order, givenDoses(order, until), patientKinetics(plan, 1.0, order), until)).toEqual(levels);
	});

	it("gives each patient their own clearance and volume around the population's", () => {
		const cls = Array.from({ length: 200 }, (_, i) => patientKinetics(plan, 1.0, vanco(`rx-k-${i}`)).clLH);
		const mean = Math.exp(cls.reduce((s, c) => s + Math.log(c), 0) / cls.length);
		// CrCl (Cockcroft–Gault, 60 y, 80 kg, 1.0 mg/dL) ≈ 89 mL/min → 0.689·89 + 3.66 ≈ 65 mL/min ≈ 3.9 L/h
		expect(mean).toBeGreaterThan(3.5);
		expect(mean).toBeLessThan(4.4);
		expect(Math.max(...cls) / Math.min(...cls)).toBeGreaterThan(2);
	});

	it('sends entries the feed reads without a rejection', () => {
		const seeded = planFor('lbh-p-0007');
		const entries = [vanco('lbh-rx-t-1'), genta('lbh-rx-t-2')].flatMap((o) => dosingDeliveries(seeded, 1.0, o, start, until).flatMap((d) => d.entries));
		const parsed = parseEntries(entries, { now: until, agents: fixtureIndex() });
		expect(parsed.rejections).toEqual([]);
		const sentOf = (type: string) => entries.filter((e) => e.resource.resourceType === type).length;
		// every dose of the gentamicin (seven days once daily), and the vancomycin's up to its first trough (before the fourth) and that fourth
		expect(sentOf('MedicationAdministration')).toBeGreaterThanOrEqual(7 + 4);
		expect(parsed.records.filter((r) => r.kind === 'administration')).toHaveLength(sentOf('MedicationAdministration'));
		expect(parsed.records.filter((r) => r.kind === 'level')).toHaveLength(sentOf('Observation'));
	});

	describe('the ward holds vancomycin after a high trough', () => {
		// a patient whose kidneys clear little vancomycin (Cockcroft–Gault ≈ 20 mL/min: 60 y, 80 kg, 4.5 mg/dL), on an unadjusted 1,250 mg q12h
		const creatinineMgDl = 4.5;
		const orders = Array.from({ length: 60 }, (_, i) => vanco(`rx-h-${i}`));
		type Resource = {
			resourceType: string;
			id: string;
			status: string;
			effectiveDateTime: string;
			valueQuantity: { value: number };
			code: { coding: { display: string }[] };
			effectivePeriod: { start: string };
		};
		type Sent = { at: Date; resource: Resource };
		const sent = (order: DosedOrder, from: Date, to: Date): Sent[] =>
			dosingDeliveries(plan, creatinineMgDl, order, from, to).flatMap((d) => d.entries.map((e) => ({ at: d.at, resource: e.resource as Resource })));
		const levelsOf = (s: Sent[]) =>
			s
				.filter((x) => x.resource.resourceType === 'Observation')
				.map((x) => ({
					at: new Date(x.resource.effectiveDateTime),
					mgL: x.resource.valueQuantity.value,
					name: x.resource.code.coding[0].display
				}))
				.sort((a, b) => a.at.getTime() - b.at.getTime());
		const doseStarts = (s: Sent[]) =>
			s
				.filter((x) => x.resource.resourceType === 'MedicationAdministration' && x.resource.status === 'completed')
				.map((x) => new Date(x.resource.effectivePeriod.start));
		const heldDue = (s: Sent[]) =>
			s
				.filter((x) => x.resource.resourceType === 'MedicationAdministration' && x.resource.status === 'not-done')
				.map((x) => new Date(x.resource.effectiveDateTime).getTime())
				.sort((a, b) => a - b);

		it('gives no dose once a trough above 20 mg/L is back (each due dose recorded not-done), and draws a random level each day until one is below 15 mg/L (common practice)', () => {
			let holds = 0;
			for (const order of orders) {
				const all = sent(order, new Date(start.getTime() - HOUR_MS), until);
				const levels = levelsOf(all);
				const high = levels.find((l) => l.name.endsWith('--trough') && l.mgL > HOLD_ABOVE_TROUGH_MGL);
				if (!high) continue;
				holds++;
				const resultAt = high.at.getTime() + LEVEL_TURNAROUND_MS;
				expect(doseStarts(all).filter((d) => d.getTime() > resultAt)).toEqual([]);
				// every dose due from the hold on is recorded as not given, so nothing downstream assumes it given
				const held = heldDue(all);
				expect(held.length).toBeGreaterThan(0);
				expect(held[0] - resultAt).toBeGreaterThanOrEqual(0);
				expect(held[0] - resultAt).toBeLessThan(12 * HOUR_MS);
				held.slice(1).forEach((t, j) => expect(t - held[j]).toBe(12 * HOUR_MS));
				expect(until.getTime() - held[held.length - 1]).toBeLessThan(12 * HOUR_MS);
				const after = levels.filter((l) => l.at > high.at);
				expect(after.length).toBeGreaterThan(0);
				after.forEach((l, j) => {
					expect(l.name.endsWith('--random')).toBe(true);
					expect(l.at.getTime() - high.at.getTime()).toBe((j + 1) * 24 * HOUR_MS);
					// the drug falls while it is held; only the last may be below the level the ward waits for
					if (j > 0) expect(l.mgL).toBeLessThan(after[j - 1].mgL);
					if (j < after.length - 1) expect(l.mgL).toBeGreaterThanOrEqual(HOLD_UNTIL_BELOW_MGL);
				});
				const last = after[after.length - 1];
				if (last.at.getTime() + 24 * HOUR_MS + LEVEL_TURNAROUND_MS <= until.getTime()) expect(last.mgL).toBeLessThan(HOLD_UNTIL_BELOW_MGL);
			}
			// about 60 % of patients have levels, and nearly all of those accumulate past 20 mg/L on this regimen
			expect(holds).toBeGreaterThan(20);
		});

		it('sends the same records played forward a few hours at a time as all at once', () => {
			for (const order of orders.slice(0, 15)) {
				const once = sent(order, new Date(start.getTime() - HOUR_MS), until);
				const ticks: Sent[] = [];
				for (let t = start.getTime() - HOUR_MS; t < until.getTime(); t += 3 * HOUR_MS + 17 * 60_000) {
					ticks.push(...sent(order, new Date(t), new Date(Math.min(until.getTime(), t + 3 * HOUR_MS + 17 * 60_000))));
				}
				const key = (x: Sent) => `${x.resource.id} ${JSON.stringify(x.resource)}`;
				expect(ticks.map(key).sort()).toEqual(once.map(key).sort());
			}
		});
	});
});
