// The flag lifecycle (product.md): new → in_review → recommended → closed with an outcome;
// snoozed (until a time or the next result) from new or in_review. Pure, shared by the server (which
// enforces it) and the pages (which offer only the actions that apply).

import { FLAG_STATES, HUMAN_OUTCOMES, type FlagState, type HumanOutcome, type Outcome } from '../domain/vocabulary';

export { FLAG_STATES, HUMAN_OUTCOMES, type FlagState, type HumanOutcome, type Outcome };

export const STATE_LABELS: Record<FlagState, string> = {
	new: 'New',
	in_review: 'In review',
	snoozed: 'Snoozed',
	recommended: 'Recommended',
	closed: 'Closed'
};

export const OUTCOME_LABELS: Record<Outcome, string> = {
	accepted: 'Accepted',
	modified: 'Modified',
	declined: 'Declined',
	no_action: 'No action needed',
	superseded: 'Superseded'
};

export type FlagAction =
	| { kind: 'claim' }
	| { kind: 'release' }
	| { kind: 'start_review' }
	| { kind: 'snooze'; until: Date | null; untilNextResult: boolean }
	| { kind: 'wake' }
	| { kind: 'note'; note: string }
	| { kind: 'recommend'; recommendationId: string }
	| { kind: 'close'; outcome: HumanOutcome; reason: string | null };

export type FlagSnapshot = { state: FlagState; assignedTo: string | null };

export type Transition =
	| { ok: true; state: FlagState; assignedTo: string | null; outcome: HumanOutcome | null; snoozedUntil: Date | null; snoozeUntilNextResult: boolean }
	| { ok: false; reason: string };

const OPEN: FlagState[] = ['new', 'in_review', 'snoozed', 'recommended'];

export function isOpen(state: FlagState) {
	return state !== 'closed';
}

/**
 * Which actions a user may take on a flag in this state (for buttons and keyboard shortcuts).
 * Pass isAdmin for an administrator, who may release or close a flag someone else has claimed.
 */
export function availableActions(flag: FlagSnapshot, userId: string, options: { isAdmin?: boolean } = {}): FlagAction['kind'][] {
	const kinds: FlagAction['kind'][] = ['claim', 'release', 'start_review', 'snooze', 'wake', 'note', 'recommend', 'close'];
	return kinds.filter((kind) => {
		const probe = probeAction(kind);
		return transition(flag, probe, userId, { isAdmin: options.isAdmin }).ok;
	});
}

function probeAction(kind: FlagAction['kind']): FlagAction {
	switch (kind) {
		case 'snooze':
			return { kind, until: null, untilNextResult: true };
		case 'note':
			return { kind, note: '·' };
		case 'recommend':
			return { kind, recommendationId: '' };
		case 'close':
			// "accepted" needs no reason, so the probe asks only whether closing is allowed at all
			return { kind, outcome: 'accepted', reason: null };
		default:
			return { kind } as FlagAction;
	}
}

/**
 * The state after `action` by `userId`, or why it is not allowed. Keeps the assignment rules in one
 * place: a flag claimed by someone else must be released (or closed) by them or an administrator.
 */
export function transition(flag: FlagSnapshot, action: FlagAction, userId: string, options: { isAdmin?: boolean; now?: Date } = {}): Transition {
	const keep = { state: flag.state, assignedTo: flag.assignedTo, outcome: null, snoozedUntil: null, snoozeUntilNextResult: false };
	const mineOrFree = flag.assignedTo === null || flag.assignedTo === userId;
	if (!isOpen(flag.state)) return { ok: false, reason: 'This flag is already closed.' };
	switch (action.kind) {
		case 'claim':
			if (flag.assignedTo === userId) return { ok: false, reason: 'You have already claimed this flag.' };
			if (flag.assignedTo !== null) return { ok: false, reason: 'Someone else has claimed this flag; they must release it first.' };
			return { ok: true, ...keep, assignedTo: userId };
		case 'release':
			if (flag.assignedTo === null) return { ok: false, reason: 'Nobody has claimed this flag.' };
			if (flag.assignedTo !== userId && !options.isAdmin)
				return { ok: false, reason: 'Only the person who claimed this flag (or an administrator) can release it.' };
			return { ok: true, ...keep, assignedTo: null, state: flag.state === 'in_review' ? 'new' : flag.state };
		case 'start_review':
			if (flag.state !== 'new') return { ok: false, reason: 'Only a new flag can be put in review.' };
			if (!mineOrFree) return { ok: false, reason: 'Someone else has claimed this flag.' };
			return { ok: true, ...keep, state: 'in_review', assignedTo: userId };
		case 'snooze': {
			if (flag.state !== 'new' && flag.state !== 'in_review') return { ok: false, reason: 'Only a new flag or one in review can be snoozed.' };
			if (!mineOrFree) return { ok: false, reason: 'Someone else has claimed this flag.' };
			const now = options.now ?? new Date();
			if (!action.untilNextResult && (!action.until || action.until <= now)) {
				return { ok: false, reason: 'Choose a snooze time in the future, or snooze until the next result.' };
			}
			return { ok: true, ...keep, state: 'snoozed', snoozedUntil: action.untilNextResult ? null : action.until, snoozeUntilNextResult: action.untilNextResult };
		}
		case 'wake':
			if (flag.state !== 'snoozed') return { ok: false, reason: 'This flag is not snoozed.' };
			return { ok: true, ...keep, state: flag.assignedTo ? 'in_review' : 'new' };
		case 'note':
			if (!action.note.trim()) return { ok: false, reason: 'Write the note first.' };
			return { ok: true, ...keep, snoozedUntil: null };
		case 'recommend':
			if (flag.state !== 'new' && flag.state !== 'in_review') return { ok: false, reason: 'A recommendation can be sent for a new flag or one in review.' };
			if (!mineOrFree) return { ok: false, reason: 'Someone else has claimed this flag.' };
			return { ok: true, ...keep, state: 'recommended', assignedTo: flag.assignedTo ?? userId };
		case 'close':
			if (!OPEN.includes(flag.state)) return { ok: false, reason: 'This flag is already closed.' };
			if (!mineOrFree && !options.isAdmin && flag.state !== 'recommended') return { ok: false, reason: 'Someone else has claimed this flag.' };
			if (action.outcome !== 'accepted' && !action.reason?.trim()) {
				return { ok: false, reason: 'Give a reason when the outcome is not "accepted".' };
			}
			return { ok: true, ...keep, state: 'closed', outcome: action.outcome };
	}
}
