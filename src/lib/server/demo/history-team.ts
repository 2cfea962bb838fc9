// How Larkspur Bay's stewardship team and prescribers behave in the demo history: who works the board
// each morning and how many flags they get through, what a pharmacist does with a flag, how long a
// physician takes to answer and what they answer. Invented proportions for the demo, not measurements
// of any hospital. Pure and deterministic: every choice comes from a hash of a stable key.
import type { ActingUser } from '../../domain/actor';
import { hashString, mulberry32 } from '../../domain/random';
import type { Severity } from '../../domain/vocabulary';
import type { Answer } from '../../validation/recommendations';
import type { PhoneAnswer } from '../../validation/recommendation-loop';

const HOUR_MS = 3_600_000;

/**
 * The morning round: 09:00 UTC on weekdays, 10:00 at weekends, one pharmacist each day, who reviews every
 * high-severity flag and then the others by priority until 16 flags in all (6 at weekends).
 */
export function roundOf(at: Date, pharmacists: ActingUser[]) {
	const weekday = at.getUTCDay();
	const weekend = weekday === 0 || weekday === 6;
	const hour = weekend ? 10 : 9;
	// the first pharmacist works Monday, Wednesday and Friday; the second the other days
	const pharmacist = pharmacists[weekday === 1 || weekday === 3 || weekday === 5 ? 0 : 1 % pharmacists.length];
	return { pharmacist, capacity: weekend ? 6 : 16, isRoundHour: at.getUTCHours() === hour && at.getUTCMinutes() === 0 };
}

export type PlannedAnswer = {
	recommendationId: string;
	at: Date;
	outcome: Answer['outcome'];
	/** stable key for the answer's own choices */
	key: string;
};

export type Decision =
	| { kind: 'recommend'; answer: (recommendationId: string, sentAt: Date) => PlannedAnswer | null }
	| { kind: 'close'; reason: string }
	| { kind: 'snooze' }
	| { kind: 'review'; note: string };

const RECOMMEND_CHANCE: Record<Severity, number> = { high: 0.6, moderate: 0.4, low: 0.2 };

const NO_ACTION_REASONS = [
	'Reviewed with the ward team: the current dose suits the clinical picture.',
	'Short course ending tomorrow; no change worth making.',
	'Creatinine already improving on fluids; the order stands.',
	'Patient moving to oral therapy today; the order stops.',
	'Reviewed: the finding reflects a single result; will watch the trend.'
];
const REVIEW_NOTES = [
	"Waiting for tomorrow's creatinine before advising.",
	'Asked the ward for a current weight.',
	'Checking with the renal team about dialysis plans.'
];
const DECLINE_REASONS = [
	'Creatinine expected to recover after fluids; will review with tomorrow’s result.',
	'Treating a deep-seated infection: keeping the higher dose deliberately.',
	'Haemodialysis starts today; the dose will follow the dialysis plan.',
	'Patient goes home tomorrow on oral therapy.',
	'Will adjust on the measured level due this afternoon.'
];

const pickOf = <T>(list: readonly T[], r: number) => list[Math.floor(r * list.length) % list.length];

/** What the pharmacist does with a new flag, given its severity and whether Ebbline proposed a dose. */
export function triage(flag: { key: string; severity: Severity; hasProposal: boolean }): Decision {
	const rng = mulberry32(hashString(`triage:${flag.key}`));
	if (flag.hasProposal && rng() < RECOMMEND_CHANCE[flag.severity]) {
		return { kind: 'recommend', answer: (recommendationId, sentAt) => plannedAnswer(flag.key, recommendationId, sentAt) };
	}
	const r = rng();
	if (r < 0.55)
		return {
			kind: 'close',
			reason: flag.hasProposal ? pickOf(NO_ACTION_REASONS, rng()) : 'No dose proposal for this order; reviewed with the team and the order stands.'
		};
	if (r < 0.85) return { kind: 'snooze' };
	return { kind: 'review', note: pickOf(REVIEW_NOTES, rng()) };
}

/**
 * When and how the physician answers: most within a few hours, some the next day (after a reminder),
 * about one in twelve not at all (reminded, escalated, then telephoned). Accepted about two times in
 * three, accepted with changes one in seven, declined with a reason otherwise.
 */
export function plannedAnswer(key: string, recommendationId: string, sentAt: Date): PlannedAnswer | null {
	const rng = mulberry32(hashString(`answer:${key}`));
	const speed = rng();
	if (speed >= 0.92) return null;
	const delayH = speed < 0.7 ? 0.4 + rng() * 5.5 : speed < 0.85 ? 6 + rng() * 14 : 20 + rng() * 20;
	const r = rng();
	const outcome = r < 0.64 ? 'accepted' : r < 0.78 ? 'modified' : 'declined';
	return { recommendationId, at: new Date(sentAt.getTime() + delayH * HOUR_MS), outcome, key };
}

type Regimen = { doseMg: number; intervalH: number; infusionH: number; loadingDoseMg?: number | null };

/**
 * The answer itself. A physician who modifies keeps the order's dose at the proposed interval (or the
 * proposed dose at the order's interval when the intervals agree); when that is the proposal itself
 * they simply accept.
 */
export function answerFor(planned: PlannedAnswer, proposed: Regimen, current: Regimen): Answer {
	if (planned.outcome === 'declined') return { outcome: 'declined', reason: pickOf(DECLINE_REASONS, mulberry32(hashString(`decline:${planned.key}`))()) };
	if (planned.outcome === 'modified') {
		const regimen =
			current.intervalH !== proposed.intervalH
				? { doseMg: current.doseMg, intervalH: proposed.intervalH, infusionH: Math.min(proposed.infusionH, proposed.intervalH), loadingDoseMg: null }
				: { doseMg: proposed.doseMg, intervalH: current.intervalH, infusionH: Math.min(current.infusionH, current.intervalH), loadingDoseMg: null };
		if (regimen.doseMg !== proposed.doseMg || regimen.intervalH !== proposed.intervalH)
			return {
				outcome: 'modified',
				regimen,
				note: current.intervalH !== proposed.intervalH ? 'Kept the dose; changed the interval as suggested.' : 'Changed the dose; kept the interval.'
			};
	}
	return { outcome: 'accepted' };
}

/** The telephone call after an escalation: reached (accepted or declined) or not (the pharmacist withdraws). */
export function phoneAnswerFor(key: string): PhoneAnswer | null {
	const rng = mulberry32(hashString(`phone:${key}`));
	const r = rng();
	if (r < 0.45) return { outcome: 'accepted', note: 'Agreed on the telephone; the ward will change the order.' };
	if (r < 0.65) return { outcome: 'declined', note: 'Prefers to keep the current dose until the next level.' };
	return null;
}
