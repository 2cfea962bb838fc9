// Periods on dialysis from the record. The 7-day window after the last session is common practice (a
// thrice-weekly programme is never more than 3–4 days between sessions).
import { describe, expect, it } from 'vitest';
import { renalReplacementAt, renalReplacementEpisodes, renalReplacementNow, type RenalReplacementEvent } from '../../../src/lib/clinical';

const day = (d: number, h = 8) => new Date(Date.UTC(2026, 10, d, h));
const session = (d: number, mode: 'ihd' | 'pd' | 'crrt' = 'ihd'): RenalReplacementEvent => ({ kind: 'session', mode, from: day(d, 8), to: day(d, 12) });

describe('renal replacement episodes (common practice)', () => {
	it('thrice-weekly sessions chain into one episode that runs until 7 days after the last', () => {
		const episodes = renalReplacementEpisodes([session(2), session(4), session(6), session(9)]);
		expect(episodes).toEqual([{ mode: 'ihd', from: day(2, 8), to: day(16, 12) }]);
		expect(renalReplacementAt(episodes, day(12).getTime())).toBe('ihd');
		expect(renalReplacementAt(episodes, day(17).getTime())).toBeNull();
	});

	it('a gap of more than 7 days starts a new episode', () => {
		const episodes = renalReplacementEpisodes([session(1), session(20)]);
		expect(episodes).toHaveLength(2);
		expect(renalReplacementAt(episodes, day(15).getTime())).toBeNull();
	});

	it('an active condition is open-ended; a resolved one ends at its abatement', () => {
		const open = renalReplacementEpisodes([{ kind: 'condition', mode: 'ihd', from: day(1), to: null }]);
		expect(open).toEqual([{ mode: 'ihd', from: day(1), to: null }]);
		const resolved = renalReplacementEpisodes([{ kind: 'condition', mode: 'ihd', from: day(1), to: day(5) }]);
		expect(renalReplacementAt(resolved, day(6).getTime())).toBeNull();
	});

	it("a pharmacist's clear ends what was running; a later session opens a new episode", () => {
		const episodes = renalReplacementEpisodes([session(2), session(4), { kind: 'clear', at: day(5) }, session(7)]);
		expect(renalReplacementAt(episodes, day(4, 20).getTime())).toBe('ihd');
		expect(renalReplacementAt(episodes, day(6).getTime())).toBeNull();
		expect(renalReplacementAt(episodes, day(8).getTime())).toBe('ihd');
	});

	it("a pharmacist's set opens an episode with the mode given; the latest start wins when two overlap (CRRT, then IHD)", () => {
		const episodes = renalReplacementEpisodes([{ kind: 'set', mode: 'crrt', from: day(1) }, session(6, 'ihd')]);
		expect(renalReplacementAt(episodes, day(3).getTime())).toBe('crrt');
		expect(renalReplacementAt(episodes, day(7).getTime())).toBe('ihd');
		expect(renalReplacementNow(episodes, day(7).getTime())).toMatchObject({ mode: 'ihd', from: day(6, 8) });
	});
});
