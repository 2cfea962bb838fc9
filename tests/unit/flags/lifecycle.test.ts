// The flag lifecycle of the product brief: new → in_review → recommended → closed with an outcome;
// snoozed (until a time or the next result) from new or in_review. Common practice for the
// assignment rules (a claimed flag belongs to whoever claimed it until released).
import { describe, expect, it } from 'vitest';
import { availableActions, FLAG_STATES, transition, type FlagAction, type FlagSnapshot, type FlagState } from '../../../src/lib/flags/lifecycle';

const ME = 'user-me';
const OTHER = 'user-other';
const NOW = new Date('2026-03-02T07:00:00Z');
const LATER = new Date('2026-03-02T15:00:00Z');
const EARLIER = new Date('2026-03-01T07:00:00Z');

const flag = (state: FlagState, assignedTo: string | null = null): FlagSnapshot => ({ state, assignedTo });
const run = (f: FlagSnapshot, action: FlagAction, who = ME, isAdmin = false) => transition(f, action, who, { isAdmin, now: NOW });

describe('claim and release', () => {
	it('claims a free flag without changing its state', () => {
		expect(run(flag('new'), { kind: 'claim' })).toMatchObject({ ok: true, state: 'new', assignedTo: ME });
		expect(run(flag('recommended'), { kind: 'claim' })).toMatchObject({ ok: true, state: 'recommended', assignedTo: ME });
	});
	it('refuses to claim a flag twice, or one someone else holds', () => {
		expect(run(flag('new', ME), { kind: 'claim' })).toMatchObject({ ok: false, reason: expect.stringMatching(/already claimed/) });
		expect(run(flag('in_review', OTHER), { kind: 'claim' })).toMatchObject({ ok: false, reason: expect.stringMatching(/release it first/) });
	});
	it('releases back to new from review; only the holder or an administrator may release', () => {
		expect(run(flag('in_review', ME), { kind: 'release' })).toMatchObject({ ok: true, state: 'new', assignedTo: null });
		expect(run(flag('snoozed', ME), { kind: 'release' })).toMatchObject({ ok: true, state: 'snoozed', assignedTo: null });
		expect(run(flag('in_review', OTHER), { kind: 'release' }).ok).toBe(false);
		expect(run(flag('in_review', OTHER), { kind: 'release' }, ME, true)).toMatchObject({ ok: true, state: 'new', assignedTo: null });
		expect(run(flag('new'), { kind: 'release' })).toMatchObject({ ok: false, reason: 'Nobody has claimed this flag.' });
	});
});

describe('review', () => {
	it('starts review on a new flag and takes it', () => {
		expect(run(flag('new'), { kind: 'start_review' })).toMatchObject({ ok: true, state: 'in_review', assignedTo: ME });
		expect(run(flag('new', ME), { kind: 'start_review' })).toMatchObject({ ok: true, state: 'in_review', assignedTo: ME });
	});
	it('refuses review on anything but a new flag, or one someone else holds', () => {
		for (const state of ['in_review', 'snoozed', 'recommended'] as const) expect(run(flag(state), { kind: 'start_review' }).ok, state).toBe(false);
		expect(run(flag('new', OTHER), { kind: 'start_review' }).ok).toBe(false);
	});
});

describe('snooze and wake', () => {
	it('snoozes a new or reviewed flag until a future time, or until the next result', () => {
		expect(run(flag('new'), { kind: 'snooze', until: LATER, untilNextResult: false })).toMatchObject({
			ok: true,
			state: 'snoozed',
			snoozedUntil: LATER,
			snoozeUntilNextResult: false
		});
		expect(run(flag('in_review', ME), { kind: 'snooze', until: null, untilNextResult: true })).toMatchObject({
			ok: true,
			state: 'snoozed',
			snoozedUntil: null,
			snoozeUntilNextResult: true,
			assignedTo: ME
		});
	});
	it('refuses a time in the past, no time at all, a recommended flag, or one someone else holds', () => {
		expect(run(flag('new'), { kind: 'snooze', until: EARLIER, untilNextResult: false }).ok).toBe(false);
		expect(run(flag('new'), { kind: 'snooze', until: NOW, untilNextResult: false }).ok).toBe(false);
		expect(run(flag('new'), { kind: 'snooze', until: null, untilNextResult: false }).ok).toBe(false);
		expect(run(flag('recommended'), { kind: 'snooze', until: null, untilNextResult: true }).ok).toBe(false);
		expect(run(flag('snoozed'), { kind: 'snooze', until: null, untilNextResult: true }).ok).toBe(false);
		expect(run(flag('new', OTHER), { kind: 'snooze', until: null, untilNextResult: true }).ok).toBe(false);
	});
	it('wakes a snoozed flag to review when someone holds it, else to new', () => {
		expect(run(flag('snoozed', ME), { kind: 'wake' })).toMatchObject({ ok: true, state: 'in_review' });
		expect(run(flag('snoozed'), { kind: 'wake' })).toMatchObject({ ok: true, state: 'new' });
		expect(run(flag('new'), { kind: 'wake' }).ok).toBe(false);
	});
});

describe('notes, recommendations and closing', () => {
	it('takes a note in any open state but not an empty one', () => {
		for (const state of ['new', 'in_review', 'snoozed', 'recommended'] as const) {
			expect(run(flag(state), { kind: 'note', note: 'Spoke to the ward.' }), state).toMatchObject({ ok: true, state });
		}
		expect(run(flag('new'), { kind: 'note', note: '   ' }).ok).toBe(false);
	});
	it('moves to recommended from new or review, assigning the sender', () => {
		expect(run(flag('new'), { kind: 'recommend', recommendationId: 'r1' })).toMatchObject({ ok: true, state: 'recommended', assignedTo: ME });
		expect(run(flag('in_review', ME), { kind: 'recommend', recommendationId: 'r1' })).toMatchObject({ ok: true, state: 'recommended', assignedTo: ME });
		expect(run(flag('snoozed'), { kind: 'recommend', recommendationId: 'r1' }).ok).toBe(false);
		expect(run(flag('in_review', OTHER), { kind: 'recommend', recommendationId: 'r1' }).ok).toBe(false);
	});
	it('closes with an outcome; every outcome but accepted needs a reason', () => {
		expect(run(flag('in_review', ME), { kind: 'close', outcome: 'accepted', reason: null })).toMatchObject({ ok: true, state: 'closed', outcome: 'accepted' });
		for (const outcome of ['modified', 'declined', 'no_action'] as const) {
			expect(run(flag('new'), { kind: 'close', outcome, reason: null }).ok, outcome).toBe(false);
			expect(run(flag('new'), { kind: 'close', outcome, reason: '  ' }).ok, outcome).toBe(false);
			expect(run(flag('new'), { kind: 'close', outcome, reason: 'Prescriber kept the dose.' }), outcome).toMatchObject({ ok: true, outcome });
		}
	});
	it('lets anyone close a recommended flag (the prescriber answered), but not another pharmacist’s claimed flag otherwise', () => {
		expect(run(flag('recommended', OTHER), { kind: 'close', outcome: 'accepted', reason: null }).ok).toBe(true);
		expect(run(flag('in_review', OTHER), { kind: 'close', outcome: 'accepted', reason: null }).ok).toBe(false);
		expect(run(flag('in_review', OTHER), { kind: 'close', outcome: 'accepted', reason: null }, ME, true).ok).toBe(true);
	});
	it('refuses everything on a closed flag', () => {
		const actions: FlagAction[] = [
			{ kind: 'claim' },
			{ kind: 'release' },
			{ kind: 'start_review' },
			{ kind: 'snooze', until: null, untilNextResult: true },
			{ kind: 'wake' },
			{ kind: 'note', note: 'x' },
			{ kind: 'recommend', recommendationId: 'r' },
			{ kind: 'close', outcome: 'accepted', reason: null }
		];
		for (const action of actions)
			expect(run(flag('closed', ME), action, ME, true), action.kind).toMatchObject({ ok: false, reason: 'This flag is already closed.' });
	});
});

describe('availableActions', () => {
	it('offers what a free new flag allows, close included', () => {
		expect(availableActions(flag('new'), ME)).toEqual(['claim', 'start_review', 'snooze', 'note', 'recommend', 'close']);
	});
	it('offers release and review to the holder, and nothing but a note to another pharmacist', () => {
		expect(availableActions(flag('new', ME), ME)).toEqual(['release', 'start_review', 'snooze', 'note', 'recommend', 'close']);
		expect(availableActions(flag('in_review', OTHER), ME)).toEqual(['note']);
	});
	it('offers an administrator release and close of someone else’s flag', () => {
		expect(availableActions(flag('in_review', OTHER), ME, { isAdmin: true })).toEqual(['release', 'note', 'close']);
	});
	it('offers wake on a snoozed flag, close on a recommended one, and nothing on a closed one', () => {
		expect(availableActions(flag('snoozed'), ME)).toEqual(['claim', 'wake', 'note', 'close']);
		expect(availableActions(flag('recommended', OTHER), ME)).toEqual(['note', 'close']);
		expect(availableActions(flag('closed', ME), ME)).toEqual([]);
	});
	it('agrees with transition() for every state and holder', () => {
		for (const state of FLAG_STATES) {
			for (const holder of [null, ME, OTHER]) {
				const offered = availableActions(flag(state, holder), ME);
				if (state === 'closed') expect(offered).toEqual([]);
				for (const kind of offered) {
					const probe: FlagAction =
						kind === 'snooze'
							? { kind, until: null, untilNextResult: true }
							: kind === 'note'
								? { kind, note: 'n' }
								: kind === 'recommend'
									? { kind, recommendationId: 'r' }
									: kind === 'close'
										? { kind, outcome: 'accepted', reason: null }
										: ({ kind } as FlagAction);
					expect(transition(flag(state, holder), probe, ME).ok, `${state}/${holder}/${kind}`).toBe(true);
				}
			}
		}
	});
});
