// The demo history's plan: deterministic, a full hospital every day, one patient per bed at a time,
// courses inside stays, and every message accepted by the feed's own checks.
import { describe, expect, it } from 'vitest';
import { hourlyFeed, planStays, SEED_PATIENTS } from '../../../../src/lib/server/demo';
import { LEVEL_CODES, parseEntries } from '../../../../src/lib/server/feed';
import { fixtureIndex } from '../feed/helpers';

const now = new Date('2026-11-30T09:30:00Z');
const DAY_MS = 86_400_000;
const days = 30;
const stays = planStays(now, days);
const feed = hourlyFeed(stays, now, days);

describe('planStays', () => {
	it('is deterministic for a given time and length', () => {
		expect(JSON.stringify(planStays(now, days))).toBe(JSON.stringify(stays));
		expect(JSON.stringify(hourlyFeed(planStays(now, days), now, days))).toBe(JSON.stringify(feed));
	});

	it("ends with today's seeded inpatients, and only they are still in hospital", () => {
		const inHospital = stays.filter((s) => s.dischargedAt === null);
		expect(inHospital).toHaveLength(SEED_PATIENTS);
		expect(new Set(inHospital.map((s) => s.plan.sourceId))).toEqual(
			new Set(Array.from({ length: SEED_PATIENTS }, (_, i) => `lbh-p-${String(i + 1).padStart(4, '0')}`))
		);
		expect(stays.filter((s) => s.dischargedAt !== null).every((s) => s.plan.sourceId.startsWith('lbh-h-'))).toBe(true);
	});

	it('keeps the census near the seeded 120 every day of the period', () => {
		for (let d = 0; d < days; d++) {
			const at = now.getTime() - d * DAY_MS;
			const census = stays.filter((s) => s.admittedAt.getTime() <= at && (s.dischargedAt?.getTime() ?? Infinity) > at).length;
			expect(census, `census ${d} days ago`).toBeGreaterThanOrEqual(100);
			expect(census, `census ${d} days ago`).toBeLessThanOrEqual(132);
		}
	});

	it('puts one patient in a bed at a time, with unique MRNs and patient ids', () => {
		const byBed = new Map<string, typeof stays>();
		for (const s of stays) byBed.set(s.bed, [...(byBed.get(s.bed) ?? []), s]);
		for (const [bed, list] of byBed) {
			const sorted = [...list].sort((a, b) => a.admittedAt.getTime() - b.admittedAt.getTime());
			for (let i = 1; i < sorted.length; i++) {
				expect(sorted[i - 1].dischargedAt, bed).not.toBeNull();
				expect((sorted[i - 1].dischargedAt as Date).getTime(), bed).toBeLessThan(sorted[i].admittedAt.getTime());
			}
		}
		expect(new Set(stays.map((s) => s.plan.mrn)).size).toBe(stays.length);
		expect(new Set(stays.map((s) => s.plan.sourceId)).size).toBe(stays.length);
	});

	it('starts every order after admission and stops it by the discharge', () => {
		for (const s of stays) {
			for (const o of s.orders) {
				expect(o.startAt.getTime()).toBeGreaterThan(s.admittedAt.getTime());
				if (s.dischargedAt) expect(o.stopAt?.getTime() ?? Infinity).toBeLessThanOrEqual(s.dischargedAt.getTime());
				if (o.stopAt) expect(o.stopAt.getTime()).toBeLessThanOrEqual(now.getTime());
			}
		}
	});
});

describe('hourlyFeed', () => {
	it('sends one message an hour at most, oldest first, none after now and none before the period', () => {
		const times = feed.map((m) => m.at.getTime());
		expect([...times].sort((a, b) => a - b)).toEqual(times);
		expect(new Set(times).size).toBe(times.length);
		expect(Math.max(...times)).toBeLessThanOrEqual(now.getTime());
		expect(Math.min(...times)).toBeGreaterThan(now.getTime() - days * DAY_MS);
	});

	it('is accepted by the feed without a rejection, with no result dated after its message', () => {
		const agents = fixtureIndex();
		for (const message of feed) {
			const parsed = parseEntries(message.entries, { now: message.at, agents });
			expect(parsed.rejections, message.at.toISOString()).toEqual([]);
		}
		const observations = feed.flatMap((m) =>
			m.entries
				.filter((e) => e.resource.resourceType === 'Observation')
				.map((e) => ({ at: m.at.getTime(), effective: Date.parse(String(e.resource.effectiveDateTime)) }))
		);
		expect(observations.length).toBeGreaterThan(days * 150);
		expect(observations.every((o) => o.effective <= o.at)).toBe(true);
	});

	it('sends the doses given of vancomycin and aminoglycoside orders, each after its order and its infusion (a held dose after it was due), and levels for some', () => {
		const orderSentAt = new Map<string, number>();
		const given: { order: string; end: number; at: number }[] = [];
		let levels = 0;
		let held = 0;
		for (const m of feed) {
			for (const e of m.entries) {
				const r = e.resource as {
					resourceType: string;
					id: string;
					status: string;
					request: { reference: string };
					effectivePeriod: { end: string };
					effectiveDateTime: string;
					code: { coding: { code: string }[] };
				};
				if (r.resourceType === 'MedicationRequest' && r.status === 'active' && !orderSentAt.has(r.id)) orderSentAt.set(r.id, m.at.getTime());
				if (r.resourceType === 'MedicationAdministration') {
					const notDone = r.status === 'not-done';
					if (notDone) held++;
					const end = Date.parse(notDone ? r.effectiveDateTime : r.effectivePeriod.end);
					given.push({ order: r.request.reference.split('/')[1], end, at: m.at.getTime() });
				}
				if (r.resourceType === 'Observation' && r.code.coding[0].code in LEVEL_CODES) levels++;
			}
		}
		expect(given.length).toBeGreaterThan(days * 20);
		expect(levels).toBeGreaterThan(days * 2);
		expect(held).toBeLessThan(given.length / 4);
		for (const g of given) {
			expect(g.end).toBeLessThanOrEqual(g.at);
			expect(orderSentAt.get(g.order), g.order).toBeLessThanOrEqual(g.at);
		}
	});
});
