// The words the board and the flag pages print for severities, weight bases and flag events. Numbers,
// dates and regimens print through src/lib/format. Pure: relative imports only.
export { SEVERITY_MARK } from '../domain/vocabulary';

export const WEIGHT_BASIS_LABELS: Record<string, string> = { actual: 'actual weight', ideal: 'IBW', adjusted: 'AdjBW' };
/** For dense rows: total (actual) body weight, ideal, adjusted. */
export const WEIGHT_BASIS_SHORT: Record<string, string> = { actual: 'TBW', ideal: 'IBW', adjusted: 'AdjBW' };

export const EVENT_LABELS: Record<string, string> = {
	opened: 'Opened',
	finding_joined: 'Finding joined',
	finding_resolved: 'Finding resolved',
	merged: 'Merged with the order’s other flags',
	refreshed: 'Refreshed by a new assessment',
	claimed: 'Claimed',
	released: 'Released',
	review_started: 'Review started',
	snoozed: 'Snoozed',
	woke: 'Woken',
	note: 'Note',
	recommended: 'Recommendation sent',
	recommendation_withdrawn: 'Recommendation withdrawn',
	closed: 'Closed'
};
