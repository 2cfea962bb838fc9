// The feed's normalised records: FHIR bundles, CSV rows, the simulator and the demo seed all become
// these before one ingest transaction stores them.
import type { LevelTiming } from '../../clinical/levels-types';
import type { AdministrationStatus, Route, Sex } from '../../domain/vocabulary';
import type { Measure } from './normalise';

export type FeedSource = 'fhir' | 'csv' | 'simulator' | 'seed';
export type Outcome = 'accepted' | 'duplicate' | 'quarantined';

/**
 * How a record names its patient: the sender's Patient id, or the MRN. `label` is for messages and
 * `field` names where the reference was (subject.reference, subject.identifier, mrn).
 */
export type PatientRef = { sourceId?: string; mrn?: string; label: string; field: string };

type Base = {
	/** entry index in the bundle, or the CSV line number */
	index: number;
	/** false for records derived from a CSV row that also carries a primary record (no outcome of their own) */
	primary: boolean;
};

export type PatientRecord = Base & {
	kind: 'patient';
	sourceId: string | null;
	mrn: string;
	givenName: string;
	familyName: string;
	birthDate: string;
	sex: Sex;
};

export type EncounterRecord = Base & {
	kind: 'encounter';
	sourceId: string;
	patient: PatientRef;
	ward: string;
	bed: string | null;
	admittedAt: Date;
	dischargedAt: Date | null;
};

export type OrderRecord = Base & {
	kind: 'order';
	sourceId: string;
	patient: PatientRef;
	encounterSourceId: string | null;
	agentId: string;
	doseMg: number;
	intervalH: number;
	infusionH: number;
	route: Route;
	status: 'active' | 'stopped';
	startAt: Date;
	stoppedAt: Date | null;
	/** the requester's name as the order gives it (FHIR requester.display, CSV prescriber_name) */
	prescriberName: string | null;
	/** who wrote the order, to be found in the prescriber directory */
	prescriber: PrescriberRef | null;
	/** what the reading of the requester found worth saying (an unresolved reference) */
	notes: string[];
};

/** A FHIR Identifier; `system` is '' when the sender gave none. */
export type PrescriberIdentifier = { system: string; value: string };

/**
 * How a record names its prescriber: a Practitioner entry of the same message (by entry index), an
 * identifier (or Practitioner resource id) on record, a PractitionerRole on record, or an e-mail
 * address (found or added to the directory). `label` is for notes.
 */
export type PrescriberRef =
	| { kind: 'entry'; index: number; label: string }
	| { kind: 'identifier'; identifier: PrescriberIdentifier; anySystem: boolean; label: string }
	| { kind: 'role'; sourceKey: string; label: string }
	| { kind: 'email'; email: string; name: string | null; label: string };

/** A FHIR Practitioner: one prescriber in the directory. */
export type PractitionerRecord = Base & {
	kind: 'practitioner';
	/** what makes two entries the same Practitioner: its resource id, else its fullUrl, else its entry */
	key: string;
	sourceId: string | null;
	name: string;
	/** false when the resource has no name and `name` stands in for it (from an identifier) */
	named: boolean;
	/** its identifiers, and its resource id as the identifier system PRACTITIONER_ID_SYSTEM */
	identifiers: PrescriberIdentifier[];
	email: string | null;
	/** why `email` is null: "no e-mail in telecom", "'abc' is not an e-mail address" */
	emailProblem: string | null;
	notes: string[];
};

/** A FHIR PractitionerRole: a prescriber's role, specialty, organisation and role e-mail. */
export type PractitionerRoleRecord = Base & {
	kind: 'practitioner-role';
	sourceKey: string;
	sourceId: string | null;
	practitioner: PrescriberRef;
	role: string | null;
	specialty: string | null;
	organization: string | null;
	email: string | null;
	active: boolean | null;
	notes: string[];
};

export type ResultRecord = Base & {
	kind: 'result';
	sourceId: string;
	patient: PatientRef;
	measure: Measure;
	loinc: string;
	value: number;
	unit: string;
	valueNormalised: number;
	unitNormalised: string;
	observedAt: Date;
};

/** An Observation sent as entered-in-error: the stored result with this id is withdrawn. */
export type RetractRecord = Base & { kind: 'retract'; sourceId: string };

/** A MedicationRequest sent as stopped, cancelled or completed: ends an order Ebbline already holds. */
export type StopRecord = Base & { kind: 'stop'; sourceId: string; stoppedAt: Date };

/**
 * Renal replacement therapy from the feed: a dialysis Procedure (one session) or a Condition "CKD
 * stage 5 on dialysis". `remove` withdraws one sent in error.
 */
export type RenalReplacementRecord = Base & {
	kind: 'renal-replacement';
	sourceId: string;
	patient: PatientRef;
	eventKind: 'session' | 'condition';
	mode: 'ihd' | 'pd' | 'crrt';
	from: Date;
	to: Date | null;
	remove: boolean;
};

/** How an administration names the order it fulfils: the MedicationRequest id (or identifier) on record. */
export type OrderRef = { sourceId: string; label: string; field: string };

export type { AdministrationStatus };

/**
 * A dose actually given (FHIR MedicationAdministration, CSV row), tied to its order. `markOnly`: sent as
 * entered-in-error, it marks the stored administration with this id (kept on record, left out of the
 * kinetics). `endAt` null: the order's infusion time stands in when stored.
 */
export type AdministrationRecord = Base & {
	kind: 'administration';
	sourceId: string;
	markOnly: boolean;
	patient: PatientRef | null;
	order: OrderRef | null;
	/** the agent the resource names, checked against the order's */
	agentId: string | null;
	status: AdministrationStatus;
	startAt: Date;
	endAt: Date | null;
	doseValue: number;
	doseUnit: string;
	doseMg: number;
};

/** A measured serum or plasma drug level (LOINC-coded), in mg/L. */
export type LevelRecord = Base & {
	kind: 'level';
	sourceId: string;
	patient: PatientRef;
	agentId: string;
	agentName: string;
	loinc: string;
	timing: LevelTiming;
	value: number;
	unit: string;
	valueMgL: number;
	observedAt: Date;
};

export type IntakeRecord =
	| PatientRecord
	| AdministrationRecord
	| LevelRecord
	| EncounterRecord
	| OrderRecord
	| ResultRecord
	| RetractRecord
	| StopRecord
	| RenalReplacementRecord
	| PractitionerRecord
	| PractitionerRoleRecord;

/** A record that failed validation: kept in quarantine with its reason and the field at fault. */
export type Rejection = {
	index: number;
	resourceType: string | null;
	sourceId: string | null;
	field: string;
	reason: string;
};

export type EntryOutcome = {
	index: number;
	resourceType: string | null;
	id: string | null;
	outcome: Outcome;
	/** for accepted records: created, updated, stopped or retracted */
	detail?: 'created' | 'updated' | 'stopped' | 'retracted';
	reason?: string;
	field?: string;
	/** for accepted records: what else the reader should know (a prescriber stored without an e-mail, a requester not found) */
	notes?: string[];
};

export type IngestSummary = {
	messageId: string | null;
	duplicateMessage: boolean;
	receivedAt: string;
	counts: { accepted: number; duplicate: number; quarantined: number };
	/** active orders queued for re-assessment */
	ordersQueued: number;
	entries: EntryOutcome[];
};
