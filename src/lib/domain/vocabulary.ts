// The product's closed word lists, written once. The database enums (db/schema), the zod schemas
// (validation, rules) and the TypeScript types all read these. Pure: relative imports only, so the
// pages, the rules and the worker can import it. Route and sex are the clinical core's own inputs and
// are defined there (the core imports nothing outside itself); they are re-exported here.
export { ROUTES, SEXES, type Route, type Sex } from '../clinical/types';

/** Most urgent first: the position in this list is the severity's rank wherever flags are ordered. */
export const SEVERITIES = ['high', 'moderate', 'low'] as const;
export type Severity = (typeof SEVERITIES)[number];

/** 0 for the most urgent severity; compare with `<` for "more urgent". */
export function severityRank(severity: Severity): number {
	return SEVERITIES.indexOf(severity);
}

/** How a severity is shown everywhere: a shape (so colour is never the only cue) and a word. */
export const SEVERITY_MARK: Record<Severity, { shape: string; word: string }> = {
	high: { shape: '◆', word: 'High' },
	moderate: { shape: '◈', word: 'Moderate' },
	low: { shape: '◇', word: 'Low' }
};

/** "◆ High": lists, e-mails, report columns. */
export const severityLabel = (severity: Severity) => `${SEVERITY_MARK[severity].shape} ${SEVERITY_MARK[severity].word}`;

/** Whether a is more urgent than b. */
export function moreUrgent(a: Severity, b: Severity): boolean {
	return severityRank(a) < severityRank(b);
}

/** The flag lifecycle in the order a flag moves through it (product.md). */
export const FLAG_STATES = ['new', 'in_review', 'snoozed', 'recommended', 'closed'] as const;
export type FlagState = (typeof FLAG_STATES)[number];

/** How a person closes a flag. */
export const HUMAN_OUTCOMES = ['accepted', 'modified', 'declined', 'no_action'] as const;
export type HumanOutcome = (typeof HUMAN_OUTCOMES)[number];

/** How a flag ended: a person's outcome, or superseded when the rules no longer raise it. */
export const OUTCOMES = [...HUMAN_OUTCOMES, 'superseded'] as const;
export type Outcome = (typeof OUTCOMES)[number];

/** What the physician answers to a recommendation. */
export const ANSWERS = ['accepted', 'modified', 'declined'] as const;
export type Answer = (typeof ANSWERS)[number];

/** A recommendation's life: sent, then answered or withdrawn by the pharmacist. */
export const RECOMMENDATION_STATUSES = ['sent', ...ANSWERS, 'withdrawn'] as const;
export type RecommendationStatus = (typeof RECOMMENDATION_STATUSES)[number];

/**
 * A recorded administration's status (FHIR MedicationAdministration codes Ebbline reads): given
 * (completed, in-progress, stopped), not given (not-done: held or refused), or withdrawn
 * (entered-in-error). The database enum keeps this order.
 */
export const ADMINISTRATION_STATUSES = ['completed', 'in-progress', 'stopped', 'entered-in-error', 'not-done'] as const;
export type AdministrationStatus = (typeof ADMINISTRATION_STATUSES)[number];

export const ROLES = ['pharmacist', 'physician', 'admin'] as const;
export type Role = (typeof ROLES)[number];
