// Periods on renal replacement therapy, derived from what the record says: dialysis sessions and
// "CKD stage 5 on dialysis" conditions from the feed, and a pharmacist's explicit set or clear.
// Pure; the clinical core reads the result as AssessInput.patient.renalReplacement.
import { HOUR_MS } from './timeline';
import type { RenalReplacementEpisode, RenalReplacementMode } from './types';

/**
 * A patient on intermittent dialysis is never more than 3–4 days from a session (thrice weekly), so a
 * programme counts as running until 7 days after its last session (common practice).
 */
export const SESSION_EPISODE_GRACE_H = 7 * 24;

export type RenalReplacementEvent =
	| { kind: 'session'; mode: RenalReplacementMode; from: Date; to: Date | null }
	| { kind: 'condition'; mode: RenalReplacementMode; from: Date; to: Date | null }
	| { kind: 'set'; mode: RenalReplacementMode; from: Date }
	| { kind: 'clear'; at: Date };

type Interval = { mode: RenalReplacementMode; fromMs: number; toMs: number };

/**
 * Episodes from events:
 * - sessions of one mode chain into an episode from the first session's start until 7 days after the
 *   last one's end (a gap of more than 7 days starts a new episode);
 * - a condition is an episode from its onset to its abatement (open while active);
 * - a pharmacist's set opens an episode from its time; a pharmacist's clear ends, at its time, every
 *   episode that began before it (a session or set after the clear opens a new one).
 */
export function renalReplacementEpisodes(events: readonly RenalReplacementEvent[]): RenalReplacementEpisode[] {
	const intervals: Interval[] = [];
	const sessions = events
		.filter((e): e is Extract<RenalReplacementEvent, { kind: 'session' }> => e.kind === 'session')
		.map((e) => ({ mode: e.mode, fromMs: e.from.getTime(), endMs: (e.to ?? e.from).getTime() }))
		.sort((a, b) => a.fromMs - b.fromMs);
	const clearsMs = events.filter((e): e is Extract<RenalReplacementEvent, { kind: 'clear' }> => e.kind === 'clear').map((e) => e.at.getTime());
	const open = new Map<RenalReplacementMode, Interval>();
	for (const s of sessions) {
		const current = open.get(s.mode);
		// a pharmacist's clear between two sessions breaks the chain: the later session starts afresh
		const clearedBetween = current !== undefined && clearsMs.some((c) => c > current.fromMs && c <= s.fromMs);
		if (current && !clearedBetween && s.fromMs <= current.toMs) current.toMs = Math.max(current.toMs, s.endMs + SESSION_EPISODE_GRACE_H * HOUR_MS);
		else {
			const next = { mode: s.mode, fromMs: s.fromMs, toMs: s.endMs + SESSION_EPISODE_GRACE_H * HOUR_MS };
			intervals.push(next);
			open.set(s.mode, next);
		}
	}
	for (const e of events) {
		if (e.kind === 'condition') intervals.push({ mode: e.mode, fromMs: e.from.getTime(), toMs: e.to === null ? Infinity : e.to.getTime() });
		else if (e.kind === 'set') intervals.push({ mode: e.mode, fromMs: e.from.getTime(), toMs: Infinity });
	}
	for (const e of events) {
		if (e.kind !== 'clear') continue;
		const atMs = e.at.getTime();
		for (const i of intervals) if (i.fromMs <= atMs && i.toMs > atMs) i.toMs = atMs;
	}
	return intervals
		.filter((i) => i.toMs > i.fromMs)
		.sort((a, b) => a.fromMs - b.fromMs)
		.map((i) => ({ mode: i.mode, from: new Date(i.fromMs), to: i.toMs === Infinity ? null : new Date(i.toMs) }));
}

/** The mode in force at tMs and since when, for the patient page ("on intermittent haemodialysis since …"). */
export function renalReplacementNow(episodes: readonly RenalReplacementEpisode[], tMs: number): RenalReplacementEpisode | null {
	let best: RenalReplacementEpisode | null = null;
	for (const e of episodes) {
		if (e.from.getTime() <= tMs && (e.to === null || e.to.getTime() > tMs) && (best === null || e.from > best.from)) best = e;
	}
	return best;
}
