// Priority of a flag on the triage board: severity first, then the size of the change behind it, then
// how long it has waited. Weights are our own (common practice: severity dominates; within a severity,
// bigger changes and older flags rise), chosen so a higher severity always outranks a lower one:
// low 0–45, moderate 50–95, high 100–145.
import type { Facts } from './facts';
import type { Severity } from './types';

export const SEVERITY_WEIGHT: Record<Severity, number> = { high: 100, moderate: 50, low: 0 };
/** at most this much for the size of the change (a two-fold change or more, on a log2 scale, reaches it at 1.5) */
export const CHANGE_POINTS = 30;
export const CHANGE_FULL_LOG2 = 1.5;
/** at most this much for age, reached after AGE_FULL_H */
export const AGE_POINTS = 15;
export const AGE_FULL_H = 72;

/**
 * Size of the change, as |log2| of the largest ratio among: half-life now/start, CrCl now/start and
 * daily dose/band dose (so halving and doubling weigh the same). 0 when none is known.
 */
export function changeLog2(facts: Pick<Facts, 'halfLifeRatio' | 'crclRatio' | 'doseBandRatio'>): number {
	let largest = 0;
	for (const ratio of [facts.halfLifeRatio, facts.crclRatio, facts.doseBandRatio]) {
		if (ratio !== null && ratio > 0 && Number.isFinite(ratio)) largest = Math.max(largest, Math.abs(Math.log2(ratio)));
	}
	return largest;
}

/** The priority score: severity weight + up to 30 for the change + up to 15 for age (0–145). */
export function priorityScore(args: { severity: Severity; changeLog2: number; ageH: number }): number {
	const change = (CHANGE_POINTS * Math.min(Math.max(args.changeLog2, 0), CHANGE_FULL_LOG2)) / CHANGE_FULL_LOG2;
	const age = (AGE_POINTS * Math.min(Math.max(args.ageH, 0), AGE_FULL_H)) / AGE_FULL_H;
	return Math.round((SEVERITY_WEIGHT[args.severity] + change + age) * 100) / 100;
}
