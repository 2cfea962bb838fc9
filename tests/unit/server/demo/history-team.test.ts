// How the demo team behaves: deterministic choices with the proportions the history promises, and
// answers the app's own validation accepts.
import { describe, expect, it } from 'vitest';
import { answerFor, phoneAnswerFor, plannedAnswer, roundOf, triage } from '../../../../src/lib/server/demo/history-team';
import { modifySchema } from '../../../../src/lib/validation/recommendations';

const keys = Array.from({ length: 4000 }, (_, i) => `lbh-rx-${i}:rule:${i % 90}`);
const share = (n: number) => n / keys.length;
const sentAt = new Date('2026-11-02T09:00:00Z');
const pharmacists = [
	{ id: 'a', email: 'a@larkspur.test', displayName: 'A', role: 'pharmacist' as const, requestId: null },
	{ id: 'b', email: 'b@larkspur.test', displayName: 'B', role: 'pharmacist' as const, requestId: null }
];

describe('the morning round', () => {
	it('is at 09:00 UTC on weekdays and 10:00 at weekends, fewer flags at weekends', () => {
		expect(roundOf(new Date('2026-11-30T09:00:00Z'), pharmacists)).toMatchObject({ isRoundHour: true, capacity: 16, pharmacist: { id: 'a' } }); // Monday
		expect(roundOf(new Date('2026-12-01T09:00:00Z'), pharmacists)).toMatchObject({ isRoundHour: true, pharmacist: { id: 'b' } }); // Tuesday
		expect(roundOf(new Date('2026-11-28T09:00:00Z'), pharmacists).isRoundHour).toBe(false); // Saturday
		expect(roundOf(new Date('2026-11-28T10:00:00Z'), pharmacists)).toMatchObject({ isRoundHour: true, capacity: 6 });
	});
});

describe('triage', () => {
	it('is deterministic for a key', () => {
		for (const key of keys.slice(0, 50))
			expect(triage({ key, severity: 'moderate', hasProposal: true }).kind).toBe(triage({ key, severity: 'moderate', hasProposal: true }).kind);
	});
	it('recommends more often the more severe the finding, and never without a proposal', () => {
		const rate = (severity: 'high' | 'moderate' | 'low') =>
			share(keys.filter((key) => triage({ key, severity, hasProposal: true }).kind === 'recommend').length);
		expect(rate('high')).toBeGreaterThan(0.55);
		expect(rate('high')).toBeLessThan(0.65);
		expect(rate('moderate')).toBeGreaterThan(0.35);
		expect(rate('moderate')).toBeLessThan(0.45);
		expect(rate('low')).toBeLessThan(0.25);
		expect(keys.some((key) => triage({ key, severity: 'high', hasProposal: false }).kind === 'recommend')).toBe(false);
	});
});

describe('the physician', () => {
	const answers = keys.map((key) => plannedAnswer(key, 'rec', sentAt));
	it('answers about eleven times in twelve, within 40 hours', () => {
		const answered = answers.filter((a) => a !== null);
		expect(share(answered.length)).toBeGreaterThan(0.9);
		expect(share(answered.length)).toBeLessThan(0.94);
		for (const a of answered) {
			const hours = (a.at.getTime() - sentAt.getTime()) / 3_600_000;
			expect(hours).toBeGreaterThan(0.3);
			expect(hours).toBeLessThanOrEqual(40);
		}
	});
	it('accepts about two in three, modifies about one in seven, declines the rest', () => {
		const answered = answers.filter((a) => a !== null);
		const of = (o: string) => answered.filter((a) => a.outcome === o).length / answered.length;
		expect(of('accepted')).toBeGreaterThan(0.6);
		expect(of('accepted')).toBeLessThan(0.68);
		expect(of('modified')).toBeGreaterThan(0.11);
		expect(of('modified')).toBeLessThan(0.17);
	});
	it('modifies to a regimen that differs from the proposal and passes the answer form’s checks, or else accepts', () => {
		const proposed = { doseMg: 1000, intervalH: 24, infusionH: 2 };
		const current = { doseMg: 1500, intervalH: 12, infusionH: 2 };
		const modified = answerFor({ recommendationId: 'r', at: sentAt, outcome: 'modified', key: 'k' }, proposed, current);
		expect(modified.outcome).toBe('modified');
		if (modified.outcome !== 'modified') return;
		expect(modified.regimen).toMatchObject({ doseMg: 1500, intervalH: 24 });
		// as the answer form would post it: text fields, an empty loading dose
		const posted = {
			doseMg: String(modified.regimen.doseMg),
			intervalH: String(modified.regimen.intervalH),
			infusionH: String(modified.regimen.infusionH),
			loadingDoseMg: '',
			note: modified.note
		};
		expect(modifySchema.safeParse(posted).success).toBe(true);
		// same interval and dose as proposed: nothing to modify
		expect(answerFor({ recommendationId: 'r', at: sentAt, outcome: 'modified', key: 'k' }, proposed, { ...proposed }).outcome).toBe('accepted');
		const declined = answerFor({ recommendationId: 'r', at: sentAt, outcome: 'declined', key: 'k' }, proposed, current);
		expect(declined.outcome === 'declined' && declined.reason.length).toBeGreaterThan(10);
	});
	it('on the telephone: reached about two times in three, or the recommendation is withdrawn', () => {
		const reached = share(keys.filter((key) => phoneAnswerFor(key) !== null).length);
		expect(reached).toBeGreaterThan(0.6);
		expect(reached).toBeLessThan(0.7);
	});
});
