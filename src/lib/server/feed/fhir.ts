// FHIR R4 intake: the Bundle envelope (a 400 when it is wrong) and the resources Ebbline reads, each
// turned into a normalised record or a rejection that names the field at fault. Practitioner and
// PractitionerRole are read in practitioner.ts.
import { createHash } from 'node:crypto';
import { z } from 'zod';
import { doseInAgentTerms, matchAgent, type AgentIndex, type AgentMention } from './agent-map';
import { ageOnDate } from '../../clinical/age';
import type { Route } from '../../domain/vocabulary';
import { ADULT_AGE_YEARS, HOURS_PER_UNIT, LOINC_CODES, normaliseValue, parseDate, parseDateTime } from './normalise';
import { emptyDirectory, findIdentifierClashes, readPractitioner, readPractitionerRole, readRequester, type LocalDirectory } from './practitioner';
import type { IntakeRecord, PatientRecord, PatientRef, PractitionerRecord, Rejection } from './types';

export const LOINC_SYSTEM = 'http://loinc.org';
export const SNOMED_SYSTEM = 'http://snomed.info/sct';
export const MAX_BUNDLE_ENTRIES = 10_000;
export const ACCEPTED_RESOURCES = [
	'Patient',
	'Encounter',
	'MedicationRequest',
	'Observation',
	'Procedure',
	'Condition',
	'Practitioner',
	'PractitionerRole'
] as const;

/**
 * SNOMED CT dialysis procedures read as renal replacement therapy: "Dialysis procedure" and the
 * descendants that name the modality. A plain "Dialysis procedure" is read as intermittent
 * haemodialysis, the common case.
 */
export const DIALYSIS_PROCEDURES: Record<string, { mode: 'ihd' | 'pd' | 'crrt'; name: string }> = {
	'108241001': { mode: 'ihd', name: 'Dialysis procedure' },
	'302497006': { mode: 'ihd', name: 'Hemodialysis' },
	'71192002': { mode: 'pd', name: 'Peritoneal dialysis' },
	'714749008': { mode: 'crrt', name: 'Continuous renal replacement therapy' }
};
/** SNOMED CT 714152005 "Chronic kidney disease stage 5 on dialysis". */
export const DIALYSIS_CONDITION = { code: '714152005', name: 'Chronic kidney disease stage 5 on dialysis' } as const;

const required = (what: string) => ({
	error: (issue: { input: unknown }) => (issue.input === undefined ? 'is required' : `must be ${what}`)
});

// ── Envelope ──────────────────────────────────────────────────────────────────────────────────────
export const bundleSchema = z.object({
	resourceType: z.literal('Bundle', {
		error: (issue) => (issue.input === undefined ? 'is required' : `must be 'Bundle' (got ${JSON.stringify(issue.input)})`)
	}),
	type: z.enum(['transaction', 'batch', 'collection'], {
		error: (issue) => (issue.input === undefined ? 'is required' : `must be transaction, batch or collection (got ${JSON.stringify(issue.input)})`)
	}),
	entry: z
		.array(z.unknown(), required('an array of entries'))
		.min(1, 'must hold at least one entry')
		.max(MAX_BUNDLE_ENTRIES, `holds more than ${MAX_BUNDLE_ENTRIES} entries; split the bundle`)
});
export type BundleEnvelope = z.infer<typeof bundleSchema>;

// ── Shared datatypes ──────────────────────────────────────────────────────────────────────────────
const fhirId = z.string(required('a string')).regex(/^[A-Za-z0-9\-.]{1,64}$/, 'must be a FHIR id (1–64 letters, digits, - or .)');
const text = z.string(required('a string'));
const coding = z.looseObject({ system: z.string().optional(), code: z.string().optional(), display: z.string().optional() });
const codeableConcept = z.looseObject({ coding: z.array(coding).optional(), text: z.string().optional() });
const reference = z.looseObject(
	{
		reference: z.string().optional(),
		identifier: z.looseObject({ system: z.string().optional(), value: text }).optional(),
		display: z.string().optional()
	},
	required('a Reference')
);
const quantity = z.looseObject(
	{
		value: z.number(required('a number')),
		unit: z.string().optional(),
		system: z.string().optional(),
		code: z.string().optional()
	},
	required('a Quantity')
);
const period = z.looseObject({ start: z.string().optional(), end: z.string().optional() });

const patientSchema = z.looseObject({
	resourceType: z.literal('Patient'),
	id: fhirId.optional(),
	identifier: z.array(z.looseObject({ system: z.string().optional(), value: text, type: codeableConcept.optional() })).optional(),
	name: z
		.array(z.looseObject({ family: z.string().optional(), given: z.array(z.string()).optional(), text: z.string().optional(), use: z.string().optional() }))
		.optional(),
	gender: z.string(required('a string')),
	birthDate: z.string(required('a date (YYYY-MM-DD)'))
});

const encounterSchema = z.looseObject({
	resourceType: z.literal('Encounter'),
	id: fhirId,
	status: z.string().optional(),
	subject: reference,
	period: z.looseObject({ start: z.string(required('a date-time')), end: z.string().optional() }, required('a Period')),
	location: z
		.array(
			z.looseObject({
				location: z.looseObject({ reference: z.string().optional(), display: z.string().optional() }),
				physicalType: codeableConcept.optional()
			}),
			required('a list of locations')
		)
		.min(1, 'must name the ward')
});

const dosageSchema = z.looseObject({
	route: codeableConcept.optional(),
	timing: z.looseObject(
		{
			repeat: z.looseObject(
				{
					frequency: z.number().int('must be a whole number').positive('must be greater than 0').optional(),
					period: z.number(required('a number')).positive('must be greater than 0'),
					periodUnit: z.string(required("a unit of time: 'min', 'h', 'd' or 'wk'")),
					duration: z.number().positive('must be greater than 0').optional(),
					durationUnit: z.string().optional(),
					boundsPeriod: period.optional()
				},
				required('a Timing.repeat')
			)
		},
		required('a Timing')
	),
	doseAndRate: z
		.array(z.looseObject({ doseQuantity: quantity, rateQuantity: quantity.optional() }), required('a list with the dose'))
		.min(1, 'must hold the dose')
});

const medicationRequestSchema = z.looseObject({
	resourceType: z.literal('MedicationRequest'),
	id: fhirId,
	status: z.string(required('a string')),
	medicationCodeableConcept: codeableConcept.optional(),
	medicationReference: reference.optional(),
	subject: reference,
	encounter: reference.optional(),
	authoredOn: z.string().optional(),
	requester: reference.optional(),
	dosageInstruction: z.array(dosageSchema).optional()
});

/** A stop needs only the order's id: the rest of the resource may be sent as before, or not at all. */
const stopSchema = z.looseObject({
	resourceType: z.literal('MedicationRequest'),
	id: fhirId,
	status: z.string(required('a string')),
	dosageInstruction: z
		.array(z.looseObject({ timing: z.looseObject({ repeat: z.looseObject({ boundsPeriod: period.optional() }).optional() }).optional() }))
		.optional()
});

const observationSchema = z.looseObject({
	resourceType: z.literal('Observation'),
	id: fhirId.optional(),
	status: z.string(required('a string')),
	code: z.looseObject(
		{ coding: z.array(coding, required('a list of codings')).min(1, 'must hold a LOINC coding'), text: z.string().optional() },
		required('a CodeableConcept')
	),
	subject: reference,
	effectiveDateTime: z.string().optional(),
	effectiveInstant: z.string().optional(),
	effectivePeriod: period.optional(),
	issued: z.string().optional(),
	valueQuantity: quantity.optional()
});

const procedureSchema = z.looseObject({
	resourceType: z.literal('Procedure'),
	id: fhirId,
	status: z.string(required('a string')),
	code: z.looseObject(
		{ coding: z.array(coding, required('a list of codings')).min(1, 'must hold a SNOMED CT coding'), text: z.string().optional() },
		required('a CodeableConcept')
	),
	subject: reference,
	performedDateTime: z.string().optional(),
	performedPeriod: period.optional()
});

const conditionSchema = z.looseObject({
	resourceType: z.literal('Condition'),
	id: fhirId,
	clinicalStatus: codeableConcept.optional(),
	verificationStatus: codeableConcept.optional(),
	code: z.looseObject(
		{ coding: z.array(coding, required('a list of codings')).min(1, 'must hold a SNOMED CT coding'), text: z.string().optional() },
		required('a CodeableConcept')
	),
	subject: reference,
	onsetDateTime: z.string().optional(),
	recordedDate: z.string().optional(),
	abatementDateTime: z.string().optional()
});

// ── Helpers ───────────────────────────────────────────────────────────────────────────────────────
export function pathString(path: readonly PropertyKey[]): string {
	let out = '';
	for (const part of path) out += typeof part === 'number' ? `[${part}]` : out ? `.${String(part)}` : String(part);
	return out;
}

/** "field message" from the first zod issue, so the reason always names the field. */
export function firstIssue(error: z.ZodError): { field: string; reason: string } {
	const issue = error.issues[0];
	const field = pathString(issue.path) || 'resource';
	return { field, reason: `${field} ${issue.message}` };
}

type Ref = { kind: 'typed'; type: string; id: string } | { kind: 'local'; url: string } | { kind: 'identifier'; value: string };

/** Patient/123, https://host/fhir/Patient/123/_history/2, urn:uuid:… or an identifier. */
export function parseReference(ref: { reference?: string; identifier?: { value: string } }): Ref | null {
	const r = ref.reference?.trim();
	if (r) {
		if (r.startsWith('urn:')) return { kind: 'local', url: r };
		const parts = r.replace(/\/_history\/[^/]+$/, '').split('/');
		if (parts.length >= 2 && parts[parts.length - 1] && parts[parts.length - 2]) {
			return { kind: 'typed', type: parts[parts.length - 2], id: parts[parts.length - 1] };
		}
		return null;
	}
	if (ref.identifier?.value?.trim()) return { kind: 'identifier', value: ref.identifier.value.trim() };
	return null;
}

const MRN_TYPE_CODES = new Set(['MR', 'MRN']);

function patientMrn(p: z.infer<typeof patientSchema>): string | null {
	const ids = p.identifier ?? [];
	const typed = ids.find((i) => i.type?.coding?.some((c) => c.code && MRN_TYPE_CODES.has(c.code.toUpperCase())));
	const bySystem = ids.find((i) => i.system && /mrn|medical-record/i.test(i.system));
	const value = (typed ?? bySystem ?? ids[0])?.value?.trim();
	return value || p.id || null;
}

function patientName(p: z.infer<typeof patientSchema>) {
	const name = p.name?.find((n) => n.use === 'official') ?? p.name?.[0];
	const given = name?.given?.join(' ').trim() ?? '';
	const family = name?.family?.trim() ?? '';
	if (!given && !family && name?.text) {
		const words = name.text.trim().split(/\s+/);
		return { givenName: words.slice(0, -1).join(' '), familyName: words.at(-1) ?? '' };
	}
	return { givenName: given, familyName: family };
}

const ROUTE_WORDS: Record<string, Route> = {
	iv: 'iv',
	intravenous: 'iv',
	intravenously: 'iv',
	'intravenous route': 'iv',
	'47625008': 'iv',
	po: 'po',
	oral: 'po',
	'by mouth': 'po',
	'oral route': 'po',
	'26643006': 'po',
	im: 'im',
	intramuscular: 'im',
	'intramuscular route': 'im',
	'78421000': 'im'
};

export function routeFrom(concept: { coding?: { code?: string; display?: string }[]; text?: string } | undefined): Route | null {
	if (!concept) return null;
	const words = [...(concept.coding ?? []).flatMap((c) => [c.code, c.display]), concept.text];
	for (const word of words) {
		const hit = word ? ROUTE_WORDS[word.trim().toLowerCase()] : undefined;
		if (hit) return hit;
	}
	return null;
}

const DOSE_UNITS: Record<string, number> = { mg: 1, g: 1000 };
/** the largest single dose accepted (common practice: well above any anti-infective in the library) */
export const MAX_DOSE_MG = 20_000;
export const MIN_INTERVAL_H = 0.5;
export const MAX_INTERVAL_H = 336;

const STOPPING = new Set(['stopped', 'cancelled', 'completed', 'entered-in-error']);
const OBSERVATION_OK = new Set(['final', 'amended', 'corrected', 'preliminary']);

export type ParseContext = { now: Date; agents: AgentIndex };

type EntryIn = { index: number; fullUrl: string | null; resource: Record<string, unknown> };
type Failure = { field: string; reason: string };
const fail = (field: string, reason: string): Failure => ({ field, reason });

/** A stable id for a result sent without one, so that re-sending it is recognised. */
export function derivedId(parts: (string | number)[]): string {
	return 'h:' + createHash('sha256').update(parts.join('|')).digest('hex').slice(0, 32);
}

/**
 * Turns bundle entries into records and rejections. Patients are read first so that other entries
 * can point at them by fullUrl; entries are otherwise independent (batch semantics for every bundle type).
 */
export function parseEntries(entries: unknown[], ctx: ParseContext): { records: IntakeRecord[]; rejections: Rejection[] } {
	const records: IntakeRecord[] = [];
	const rejections: Rejection[] = [];
	const items: EntryIn[] = [];
	const reject = (index: number, resource: unknown, f: Failure) => {
		const r = (resource ?? {}) as Record<string, unknown>;
		rejections.push({
			index,
			resourceType: typeof r.resourceType === 'string' ? r.resourceType : null,
			sourceId: typeof r.id === 'string' ? r.id : null,
			field: f.field,
			reason: f.reason
		});
	};

	entries.forEach((entry, index) => {
		if (entry === null || typeof entry !== 'object' || Array.isArray(entry)) {
			return reject(index, entry, fail('entry', `entry[${index}] must be an object with a resource`));
		}
		const e = entry as { fullUrl?: unknown; resource?: unknown };
		if (e.resource === null || typeof e.resource !== 'object' || Array.isArray(e.resource)) {
			return reject(index, e, fail('resource', `entry[${index}].resource is required`));
		}
		const resource = e.resource as Record<string, unknown>;
		if (typeof resource.resourceType !== 'string') {
			return reject(index, resource, fail('resourceType', 'resourceType is required'));
		}
		if (!(ACCEPTED_RESOURCES as readonly string[]).includes(resource.resourceType)) {
			return reject(index, resource, fail('resourceType', `resourceType '${resource.resourceType}' is not accepted; send ${ACCEPTED_RESOURCES.join(', ')}`));
		}
		items.push({ index, fullUrl: typeof e.fullUrl === 'string' ? e.fullUrl : null, resource });
	});

	// Patients first: other entries may point at them by fullUrl within the bundle.
	const localPatients = new Map<string, PatientRecord | Failure>();
	for (const item of items.filter((i) => i.resource.resourceType === 'Patient')) {
		const result = readPatient(item, ctx);
		if ('kind' in result) records.push(result);
		else reject(item.index, item.resource, result);
		if (item.fullUrl) localPatients.set(item.fullUrl, result);
		if (typeof item.resource.id === 'string') localPatients.set(`Patient/${item.resource.id}`, result);
	}
	const directory = readDirectory(items, records, (index, resource, f) => reject(index, resource, f));
	const localEncounters = new Map<string, string>();
	for (const item of items) {
		if (item.resource.resourceType === 'Encounter' && item.fullUrl && typeof item.resource.id === 'string') {
			localEncounters.set(item.fullUrl, item.resource.id);
		}
	}

	const patientRef = (subject: { reference?: string; identifier?: { value: string } } | undefined): PatientRef | Failure => {
		if (!subject) return fail('subject', 'subject is required (a reference to the Patient)');
		const ref = parseReference(subject);
		if (ref === null) return fail('subject.reference', 'subject needs a reference (Patient/<id> or a bundle fullUrl) or an identifier (MRN)');
		if (ref.kind === 'identifier') return { mrn: ref.value, label: `MRN ${ref.value}`, field: 'subject.identifier' };
		if (ref.kind === 'local') {
			const local = localPatients.get(ref.url);
			if (!local) return fail('subject.reference', `subject.reference ${ref.url} matches no Patient entry in this bundle`);
			if (!('kind' in local)) return fail('subject.reference', `subject.reference ${ref.url} points at a Patient entry that was quarantined (${local.reason})`);
			return { sourceId: local.sourceId ?? undefined, mrn: local.mrn, label: ref.url, field: 'subject.reference' };
		}
		if (ref.type !== 'Patient') return fail('subject.reference', `subject.reference must point at a Patient (got ${ref.type})`);
		const local = localPatients.get(`Patient/${ref.id}`);
		if (local && !('kind' in local)) {
			return fail('subject.reference', `subject.reference Patient/${ref.id} points at a Patient entry that was quarantined (${local.reason})`);
		}
		return { sourceId: ref.id, label: `Patient/${ref.id}`, field: 'subject.reference' };
	};

	for (const item of items) {
		const type = item.resource.resourceType;
		if (type === 'Patient' || type === 'Practitioner' || type === 'PractitionerRole') continue;
		const result =
			type === 'Encounter'
				? readEncounter(item, ctx, patientRef)
				: type === 'MedicationRequest'
					? readMedicationRequest(item, ctx, patientRef, localEncounters, directory)
					: type === 'Procedure'
						? readProcedure(item, ctx, patientRef)
						: type === 'Condition'
							? readCondition(item, ctx, patientRef)
							: readObservation(item, ctx, patientRef);
		if ('kind' in result) records.push(result);
		else reject(item.index, item.resource, result);
	}
	return { records, rejections };
}

/**
 * Practitioners, then PractitionerRoles (which point at them), before the orders whose requester
 * points at either. Returns the message's local directory by fullUrl and Type/id.
 */
function readDirectory(items: EntryIn[], records: IntakeRecord[], reject: (index: number, resource: unknown, f: Failure) => void): LocalDirectory {
	const directory = emptyDirectory();
	const remember = <T>(map: Map<string, T>, item: EntryIn, type: string, value: T) => {
		if (item.fullUrl) map.set(item.fullUrl, value);
		if (typeof item.resource.id === 'string') map.set(`${type}/${item.resource.id}`, value);
	};
	const practitioners: { item: EntryIn; read: PractitionerRecord | Failure }[] = items
		.filter((i) => i.resource.resourceType === 'Practitioner')
		.map((item) => ({ item, read: readPractitioner(item) }));
	const clashes = new Map(
		findIdentifierClashes(practitioners.map((p) => p.read).filter((r): r is PractitionerRecord => !isFailure(r))).map((c) => [c.record, c])
	);
	for (const { item, read } of practitioners) {
		const clash = isFailure(read) ? undefined : clashes.get(read);
		const outcome: PractitionerRecord | Failure = clash ? fail(clash.field, clash.reason) : read;
		if (isFailure(outcome)) reject(item.index, item.resource, outcome);
		else records.push(outcome);
		remember(directory.practitioners, item, 'Practitioner', outcome);
	}
	for (const item of items.filter((i) => i.resource.resourceType === 'PractitionerRole')) {
		const read = readPractitionerRole(item, directory);
		if (isFailure(read)) reject(item.index, item.resource, read);
		else records.push(read);
		remember(directory.roles, item, 'PractitionerRole', read);
	}
	return directory;
}

type RefFn = (subject: { reference?: string; identifier?: { value: string } } | undefined) => PatientRef | Failure;
const isFailure = (x: unknown): x is Failure => typeof x === 'object' && x !== null && 'reason' in x && 'field' in x;

function readPatient(item: EntryIn, ctx: ParseContext): PatientRecord | Failure {
	const parsed = patientSchema.safeParse(item.resource);
	if (!parsed.success) return firstIssue(parsed.error);
	const p = parsed.data;
	const mrn = patientMrn(p);
	if (!mrn) return fail('identifier', 'identifier is required: send the MRN as an identifier (type MR) or give the Patient an id');
	if (p.gender !== 'female' && p.gender !== 'male') {
		return fail('gender', `gender '${p.gender}' cannot be used: the creatinine clearance equations need female or male (administrative gender)`);
	}
	const birth = parseDate(p.birthDate, ctx.now);
	if (!birth.ok) return fail('birthDate', `birthDate ${birth.reason}`);
	if (ageOnDate(birth.date, ctx.now) < ADULT_AGE_YEARS) {
		return fail('birthDate', `birthDate ${birth.date}: the patient is under ${ADULT_AGE_YEARS}; Ebbline's renal equations are for adults`);
	}
	const { givenName, familyName } = patientName(p);
	return {
		kind: 'patient',
		index: item.index,
		primary: true,
		sourceId: p.id ?? null,
		mrn,
		givenName,
		familyName,
		birthDate: birth.date,
		sex: p.gender
	};
}

function readEncounter(item: EntryIn, ctx: ParseContext, patientRef: RefFn): IntakeRecord | Failure {
	const parsed = encounterSchema.safeParse(item.resource);
	if (!parsed.success) return firstIssue(parsed.error);
	const e = parsed.data;
	const patient = patientRef(e.subject);
	if (isFailure(patient)) return patient;
	const start = parseDateTime(e.period.start, ctx.now, 'period.start');
	if (!start.ok) return fail('period.start', `period.start ${start.reason}`);
	let dischargedAt: Date | null = null;
	if (e.period.end) {
		const end = parseDateTime(e.period.end, ctx.now, 'period.end');
		if (!end.ok) return fail('period.end', `period.end ${end.reason}`);
		if (end.at < start.at) return fail('period.end', 'period.end is before period.start');
		dischargedAt = end.at;
	}
	const isType = (l: (typeof e.location)[number], code: string) => l.physicalType?.coding?.some((c) => c.code === code) ?? false;
	const wardLoc = e.location.find((l) => isType(l, 'wa')) ?? e.location.find((l) => !l.physicalType) ?? e.location[0];
	const bedLoc = e.location.find((l) => isType(l, 'bd')) ?? e.location.find((l) => l !== wardLoc && !l.physicalType);
	const ward = wardLoc.location.display?.trim();
	if (!ward) return fail('location', 'location[].location.display must name the ward (physicalType wa)');
	return {
		kind: 'encounter',
		index: item.index,
		primary: true,
		sourceId: e.id,
		patient,
		ward,
		bed: bedLoc?.location.display?.trim() || null,
		admittedAt: start.at,
		dischargedAt
	};
}

function readMedicationRequest(
	item: EntryIn,
	ctx: ParseContext,
	patientRef: RefFn,
	localEncounters: Map<string, string>,
	directory: LocalDirectory
): IntakeRecord | Failure {
	if (typeof item.resource.status === 'string' && STOPPING.has(item.resource.status)) {
		const stop = stopSchema.safeParse(item.resource);
		if (!stop.success) return firstIssue(stop.error);
		const end = stop.data.dosageInstruction?.[0]?.timing?.repeat?.boundsPeriod?.end;
		let stoppedAt = ctx.now;
		if (end) {
			const t = parseDateTime(end, ctx.now, 'boundsPeriod.end');
			if (!t.ok) return fail('dosageInstruction[0].timing.repeat.boundsPeriod.end', `dosageInstruction[0].timing.repeat.boundsPeriod.end ${t.reason}`);
			stoppedAt = t.at;
		}
		return { kind: 'stop', index: item.index, primary: true, sourceId: stop.data.id, stoppedAt };
	}
	const parsed = medicationRequestSchema.safeParse(item.resource);
	if (!parsed.success) return firstIssue(parsed.error);
	const m = parsed.data;
	if (m.status !== 'active') {
		return fail('status', `status '${m.status}' is not accepted: send active for a running order, or stopped, cancelled or completed to end it`);
	}
	const patient = patientRef(m.subject);
	if (isFailure(patient)) return patient;
	if (!m.medicationCodeableConcept) {
		return fail(
			'medicationCodeableConcept',
			m.medicationReference
				? 'medicationReference is not supported: send medicationCodeableConcept with an ATC or RxNorm code or the agent name'
				: 'medicationCodeableConcept is required (ATC or RxNorm code, or the agent name)'
		);
	}
	const mentions: AgentMention[] = [
		...(m.medicationCodeableConcept.coding ?? []).map((c) => ({ system: c.system ?? null, code: c.code ?? null, display: c.display ?? null })),
		{ text: m.medicationCodeableConcept.text ?? null }
	];
	const match = matchAgent(ctx.agents, mentions);
	if (!match.ok) return fail('medicationCodeableConcept', `medicationCodeableConcept: ${match.reason}`);

	const dosage = m.dosageInstruction?.[0];
	if (!dosage) return fail('dosageInstruction', 'dosageInstruction is required (dose, timing and route)');
	const d = 'dosageInstruction[0]';
	const dose = dosage.doseAndRate[0].doseQuantity;
	const doseUnitText = (dose.code ?? dose.unit ?? '').trim();
	// a UCUM annotation may state the dose basis of a combination product: mg{trimethoprim}, mg{combined}
	const annotated = /^([^{}]*)\{([^{}]*)\}$/.exec(doseUnitText);
	const doseUnit = annotated ? annotated[1].trim() : doseUnitText;
	const factor = DOSE_UNITS[doseUnit];
	if (factor === undefined) {
		return fail(`${d}.doseAndRate[0].doseQuantity.code`, `${d}.doseAndRate[0].doseQuantity unit '${doseUnitText}' is not accepted; send mg or g`);
	}
	const inTerms = doseInAgentTerms(match.agent, dose.value * factor, annotated ? annotated[2] : null);
	if (!inTerms.ok) return fail(`${d}.doseAndRate[0].doseQuantity.code`, `${d}.doseAndRate[0].doseQuantity: ${inTerms.reason}`);
	const doseMg = inTerms.doseMg;
	if (!(doseMg > 0)) return fail(`${d}.doseAndRate[0].doseQuantity.value`, `${d}.doseAndRate[0].doseQuantity.value must be greater than 0`);
	if (doseMg > MAX_DOSE_MG) {
		return fail(
			`${d}.doseAndRate[0].doseQuantity.value`,
			`${d}.doseAndRate[0].doseQuantity ${dose.value} ${doseUnit} is above the largest plausible dose (${MAX_DOSE_MG} mg)`
		);
	}
	const repeat = dosage.timing.repeat;
	const hoursPerPeriod = HOURS_PER_UNIT[repeat.periodUnit];
	if (hoursPerPeriod === undefined) {
		return fail(`${d}.timing.repeat.periodUnit`, `${d}.timing.repeat.periodUnit '${repeat.periodUnit}' is not accepted; send min, h, d or wk`);
	}
	const intervalH = (repeat.period * hoursPerPeriod) / (repeat.frequency ?? 1);
	if (intervalH < MIN_INTERVAL_H || intervalH > MAX_INTERVAL_H) {
		return fail(`${d}.timing.repeat.period`, `${d}.timing.repeat gives a dosing interval of ${intervalH} h, outside ${MIN_INTERVAL_H}–${MAX_INTERVAL_H} h`);
	}
	const route = routeFrom(dosage.route);
	if (route === null) return fail(`${d}.route`, `${d}.route is required: intravenous (SNOMED 47625008), oral (26643006) or intramuscular (78421000)`);

	let infusionH: number;
	if (repeat.duration !== undefined) {
		const unitH = HOURS_PER_UNIT[repeat.durationUnit ?? ''];
		if (unitH === undefined) return fail(`${d}.timing.repeat.durationUnit`, `${d}.timing.repeat.durationUnit must be min, h or d`);
		infusionH = repeat.duration * unitH;
	} else if (dosage.doseAndRate[0].rateQuantity) {
		const rate = dosage.doseAndRate[0].rateQuantity;
		const rateUnit = (rate.code ?? rate.unit ?? '').trim();
		if (rateUnit !== 'mg/h' || !(rate.value > 0)) {
			return fail(`${d}.doseAndRate[0].rateQuantity`, `${d}.doseAndRate[0].rateQuantity must be a positive rate in mg/h (or send timing.repeat.duration)`);
		}
		infusionH = doseMg / rate.value;
	} else {
		infusionH = route === 'iv' ? match.agent.usualInfusionH : 0;
	}
	if (infusionH > intervalH) {
		return fail(`${d}.timing.repeat.duration`, `${d}: the infusion time (${infusionH} h) is longer than the dosing interval (${intervalH} h)`);
	}

	const startText = repeat.boundsPeriod?.start ?? m.authoredOn;
	if (!startText) return fail('authoredOn', 'authoredOn (or dosageInstruction[0].timing.repeat.boundsPeriod.start) is required: when the order started');
	const startField = repeat.boundsPeriod?.start ? `${d}.timing.repeat.boundsPeriod.start` : 'authoredOn';
	const start = parseDateTime(startText, ctx.now, startField);
	if (!start.ok) return fail(startField, `${startField} ${start.reason}`);

	let encounterSourceId: string | null = null;
	if (m.encounter) {
		const ref = parseReference(m.encounter);
		if (ref?.kind === 'typed' && ref.type === 'Encounter') encounterSourceId = ref.id;
		else if (ref?.kind === 'local') encounterSourceId = localEncounters.get(ref.url) ?? null;
	}
	return {
		kind: 'order',
		index: item.index,
		primary: true,
		sourceId: m.id,
		patient,
		encounterSourceId,
		agentId: match.agent.id,
		doseMg,
		intervalH,
		infusionH,
		route,
		status: 'active',
		startAt: start.at,
		stoppedAt: null,
		prescriberName: m.requester?.display?.trim() || null,
		...requesterOf(m.requester, directory)
	};
}

function requesterOf(requester: z.infer<typeof reference> | undefined, directory: LocalDirectory) {
	const { ref, notes } = readRequester(requester, directory);
	return { prescriber: ref, notes };
}

function readObservation(item: EntryIn, ctx: ParseContext, patientRef: RefFn): IntakeRecord | Failure {
	const parsed = observationSchema.safeParse(item.resource);
	if (!parsed.success) return firstIssue(parsed.error);
	const o = parsed.data;
	if (o.status === 'entered-in-error') {
		const id = o.id ?? (item.fullUrl?.startsWith('urn:') ? item.fullUrl : null);
		if (!id) return fail('id', 'id is required to withdraw a result sent in error');
		return { kind: 'retract', index: item.index, primary: true, sourceId: id };
	}
	if (!OBSERVATION_OK.has(o.status)) {
		return fail('status', `status '${o.status}' carries no result Ebbline can use; send final, amended, corrected or preliminary`);
	}
	const loincCodings = o.code.coding.filter((c) => c.system === LOINC_SYSTEM && c.code);
	if (loincCodings.length === 0) return fail('code.coding', `code.coding has no LOINC coding (system ${LOINC_SYSTEM})`);
	const known = loincCodings.find((c) => LOINC_CODES[c.code as string]);
	if (!known) {
		const c = loincCodings[0];
		return fail(
			'code.coding',
			`code.coding LOINC ${c.code}${c.display ? ` (${c.display})` : ''} is not one Ebbline reads; accepted: ${Object.keys(LOINC_CODES).join(', ')}`
		);
	}
	const loinc = known.code as string;
	const patient = patientRef(o.subject);
	if (isFailure(patient)) return patient;
	const timeText = o.effectiveDateTime ?? o.effectiveInstant ?? o.effectivePeriod?.start ?? o.issued;
	const timeField = o.effectiveDateTime
		? 'effectiveDateTime'
		: o.effectiveInstant
			? 'effectiveInstant'
			: o.effectivePeriod?.start
				? 'effectivePeriod.start'
				: 'issued';
	if (!timeText) return fail('effectiveDateTime', 'effectiveDateTime is required: when the sample was taken or the measurement made');
	const at = parseDateTime(timeText, ctx.now, timeField);
	if (!at.ok) return fail(timeField, `${timeField} ${at.reason}`);
	if (!o.valueQuantity) return fail('valueQuantity', 'valueQuantity is required (a number with a UCUM unit)');
	const unit = (o.valueQuantity.code ?? o.valueQuantity.unit ?? '').trim();
	const unitField = o.valueQuantity.code !== undefined ? 'valueQuantity.code' : 'valueQuantity.unit';
	if (!unit) return fail('valueQuantity.code', 'valueQuantity.code is required: the UCUM unit');
	const n = normaliseValue(LOINC_CODES[loinc].measure, o.valueQuantity.value, unit, loinc);
	if (!n.ok) {
		const field = n.field === 'unit' ? unitField : 'valueQuantity.value';
		return fail(field, `${field}: ${n.reason}`);
	}
	const sourceId =
		o.id ??
		(item.fullUrl?.startsWith('urn:') ? item.fullUrl : derivedId([patient.sourceId ?? '', patient.mrn ?? '', loinc, at.at.toISOString(), n.value, n.unit]));
	return {
		kind: 'result',
		index: item.index,
		primary: true,
		sourceId,
		patient,
		measure: n.measure,
		loinc,
		value: n.value,
		unit: n.unit,
		valueNormalised: n.valueNormalised,
		unitNormalised: n.unitNormalised,
		observedAt: at.at
	};
}

const PROCEDURE_COUNTS = new Set(['completed', 'in-progress']);
const PROCEDURE_IGNORED = new Set(['not-done', 'preparation', 'on-hold', 'stopped', 'unknown']);

function snomedCodes(concept: { coding: { system?: string; code?: string }[] }): string[] {
	return concept.coding.filter((c) => c.system === SNOMED_SYSTEM && c.code).map((c) => c.code as string);
}

/** A dialysis session (SNOMED CT dialysis procedures); entered-in-error withdraws one sent before. */
function readProcedure(item: EntryIn, ctx: ParseContext, patientRef: RefFn): IntakeRecord | Failure {
	const parsed = procedureSchema.safeParse(item.resource);
	if (!parsed.success) return firstIssue(parsed.error);
	const p = parsed.data;
	const codes = snomedCodes(p.code);
	if (codes.length === 0) return fail('code.coding', `code.coding has no SNOMED CT coding (system ${SNOMED_SYSTEM})`);
	const known = codes.find((c) => DIALYSIS_PROCEDURES[c]);
	if (!known) {
		return fail(
			'code.coding',
			`code.coding SNOMED CT ${codes[0]} is not a procedure Ebbline reads; accepted: ${Object.entries(DIALYSIS_PROCEDURES)
				.map(([c, d]) => `${c} ${d.name}`)
				.join(', ')}`
		);
	}
	const patient = patientRef(p.subject);
	if (isFailure(patient)) return patient;
	const mode = DIALYSIS_PROCEDURES[known].mode;
	if (p.status === 'entered-in-error') {
		return {
			kind: 'renal-replacement',
			index: item.index,
			primary: true,
			sourceId: `Procedure/${p.id}`,
			patient,
			eventKind: 'session',
			mode,
			from: ctx.now,
			to: null,
			remove: true
		};
	}
	if (PROCEDURE_IGNORED.has(p.status))
		return fail('status', `status '${p.status}': the session did not take place, so there is nothing to record; send completed or in-progress`);
	if (!PROCEDURE_COUNTS.has(p.status))
		return fail('status', `status '${p.status}' is not a Procedure status Ebbline reads; send completed, in-progress or entered-in-error`);
	const startText = p.performedPeriod?.start ?? p.performedDateTime;
	const startField = p.performedPeriod?.start ? 'performedPeriod.start' : 'performedDateTime';
	if (!startText) return fail('performedDateTime', 'performedDateTime or performedPeriod.start is required: when the session took place');
	const start = parseDateTime(startText, ctx.now, startField);
	if (!start.ok) return fail(startField, `${startField} ${start.reason}`);
	let to: Date | null = null;
	if (p.performedPeriod?.end) {
		const end = parseDateTime(p.performedPeriod.end, ctx.now, 'performedPeriod.end');
		if (!end.ok) return fail('performedPeriod.end', `performedPeriod.end ${end.reason}`);
		if (end.at < start.at) return fail('performedPeriod.end', 'performedPeriod.end is before performedPeriod.start');
		to = end.at;
	}
	return {
		kind: 'renal-replacement',
		index: item.index,
		primary: true,
		sourceId: `Procedure/${p.id}`,
		patient,
		eventKind: 'session',
		mode,
		from: start.at,
		to,
		remove: false
	};
}

/** "CKD stage 5 on dialysis": an ongoing programme while active, ended by its abatement. */
function readCondition(item: EntryIn, ctx: ParseContext, patientRef: RefFn): IntakeRecord | Failure {
	const parsed = conditionSchema.safeParse(item.resource);
	if (!parsed.success) return firstIssue(parsed.error);
	const c = parsed.data;
	const codes = snomedCodes(c.code);
	if (!codes.includes(DIALYSIS_CONDITION.code)) {
		return fail(
			'code.coding',
			codes.length === 0
				? `code.coding has no SNOMED CT coding (system ${SNOMED_SYSTEM})`
				: `code.coding SNOMED CT ${codes[0]} is not a condition Ebbline reads; accepted: ${DIALYSIS_CONDITION.code} ${DIALYSIS_CONDITION.name}`
		);
	}
	const patient = patientRef(c.subject);
	if (isFailure(patient)) return patient;
	const verification = c.verificationStatus?.coding?.find((x) => x.code)?.code;
	if (verification === 'entered-in-error') {
		return {
			kind: 'renal-replacement',
			index: item.index,
			primary: true,
			sourceId: `Condition/${c.id}`,
			patient,
			eventKind: 'condition',
			mode: 'ihd',
			from: ctx.now,
			to: null,
			remove: true
		};
	}
	const status = c.clinicalStatus?.coding?.find((x) => x.code)?.code ?? 'active';
	if (!['active', 'recurrence', 'relapse', 'inactive', 'remission', 'resolved'].includes(status)) {
		return fail('clinicalStatus', `clinicalStatus '${status}' is not one Ebbline reads; send active or resolved`);
	}
	const onsetText = c.onsetDateTime ?? c.recordedDate;
	const onsetField = c.onsetDateTime ? 'onsetDateTime' : 'recordedDate';
	if (!onsetText) return fail('onsetDateTime', 'onsetDateTime (or recordedDate) is required: since when the patient is on dialysis');
	const onset = parseDateTime(onsetText, ctx.now, onsetField);
	if (!onset.ok) return fail(onsetField, `${onsetField} ${onset.reason}`);
	let to: Date | null = null;
	if (['inactive', 'remission', 'resolved'].includes(status)) {
		if (!c.abatementDateTime) return fail('abatementDateTime', `abatementDateTime is required when clinicalStatus is ${status}: when dialysis ended`);
		const end = parseDateTime(c.abatementDateTime, ctx.now, 'abatementDateTime');
		if (!end.ok) return fail('abatementDateTime', `abatementDateTime ${end.reason}`);
		if (end.at < onset.at) return fail('abatementDateTime', 'abatementDateTime is before the onset');
		to = end.at;
	}
	// the modality is not in the condition: intermittent haemodialysis unless a PD session is on record (the timeline decides)
	return {
		kind: 'renal-replacement',
		index: item.index,
		primary: true,
		sourceId: `Condition/${c.id}`,
		patient,
		eventKind: 'condition',
		mode: 'ihd',
		from: onset.at,
		to,
		remove: false
	};
}
