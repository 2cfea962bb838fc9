// Shapes the triage board API answers with; shared by the server queries and the pages.
import type { Severity, Sex } from '../domain/vocabulary';
import type { FlagAction, FlagState, Outcome } from './lifecycle';

export type { Severity };

/** One rule holding for the flag's order (for a closed flag: one that held when it closed). */
export type FindingSummary = { id: string; ruleKey: string; ruleTitle: string; severity: Severity; text: string };

/** A finding with its life inside the flag, for the flag page and the API. */
export type FindingView = FindingSummary & {
	suggestedAction: string | null;
	raisedAt: string;
	raisedAssessmentId: string;
	assessmentId: string;
	resolvedAt: string | null;
	resolvedAssessmentId: string | null;
	resolvedReason: string | null;
};

export type BoardRow = {
	id: string;
	version: number;
	state: FlagState;
	/** a snoozed flag whose time has passed: back on the worklist though nothing has woken it yet */
	snoozeEnded: boolean;
	snoozedUntil: string | null;
	snoozeUntilNextResult: boolean;
	severity: Severity;
	priority: number;
	/** the worst finding's rule and text (the row's headline) */
	ruleKey: string;
	ruleTitle: string;
	finding: string;
	/** every finding of the flag, worst first (the headline is the first) */
	findings: FindingSummary[];
	/** when a more severe finding last joined (the board marks it for a day) */
	escalatedAt: string | null;
	openedAt: string;
	assignee: { id: string; name: string } | null;
	patient: {
		id: string;
		mrn: string;
		givenName: string;
		familyName: string;
		ageYears: number;
		sex: Sex;
		ward: string | null;
		bed: string | null;
	};
	order: { id: string; agentName: string; agentCode: string; doseMg: number; intervalH: number; infusionH: number; route: string };
	/** when the flag's assessment was made (the order re-assessed on the results stored by then) */
	assessedAt: string;
	/** when the newest creatinine and albumin that assessment used were taken (null: none) */
	creatinineAt: string | null;
	albuminAt: string | null;
	crclStartMlMin: number | null;
	crclNowMlMin: number | null;
	weightBasis: string | null;
	albuminGL: number | null;
	halfLifeStartH: number | null;
	halfLifeNowH: number | null;
};

export type BoardFacets = { wards: string[]; rules: { key: string; title: string }[]; agents: { code: string; name: string }[] };

export type BoardPage = {
	rows: BoardRow[];
	/** pass back as `cursor` for the next page; null on the last page */
	nextCursor: string | null;
	/** flags matching the filters (all pages) */
	total: number;
	/** server time of this answer: poll with openedAfter=asOf to learn of new flags */
	asOf: string;
	facets?: BoardFacets;
	/** with the `order` filter: each named order's newest assessment, flagged or not (an unknown id is left out) */
	orders?: OrderAssessed[];
};

/**
 * An order's newest assessment as the board knows it. With no row for the order in the same answer,
 * the order had no flag (of the asked state) as of this assessment or a newer one.
 */
export type OrderAssessed = { id: string; assessedAt: string | null; creatinineAt: string | null; albuminAt: string | null };

export type FlagEventView = {
	id: number;
	kind: string;
	fromState: FlagState | null;
	toState: FlagState | null;
	note: string | null;
	data: Record<string, unknown> | null;
	at: string;
	actor: string | null;
};

export type FlagActionKind = FlagAction['kind'];

export type FlagHistoryItem = {
	id: string;
	state: FlagState;
	outcome: Outcome | null;
	severity: Severity;
	ruleKey: string;
	finding: string;
	agentName: string;
	openedAt: string;
	closedAt: string | null;
};

type BandComparison = 'above' | 'within' | 'below' | 'unknown';

/**
 * How the order's daily dose compares with the library regimen, as the rules last saw it: the flag's
 * facts are refreshed with the active rule set's band tolerance, while the stored assessment keeps the
 * tolerance of the day it was made. The assessment's own word when the flag stored no facts.
 */
export function doseVsBand(facts: unknown, assessed: BandComparison): BandComparison {
	const word = facts && typeof facts === 'object' ? (facts as { doseVsBand?: unknown }).doseVsBand : undefined;
	return word === 'above' || word === 'within' || word === 'below' || word === 'unknown' ? word : assessed;
}
