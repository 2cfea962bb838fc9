// FHIR Practitioner and PractitionerRole, and the requester of a MedicationRequest: the prescriber
// directory as the feed sends it. Pure reading, no database: each entry becomes a record or a
// rejection that names the field. A missing or unusable e-mail is no reason to reject a prescriber:
// they are kept, with the reason there is no address, so that their orders can still name them.
import { z } from 'zod';
import { fail, firstIssue, isFailure, parseReference, required, type EntryIn, type Failure } from './fhir-common';
import type { PractitionerRecord, PractitionerRoleRecord, PrescriberIdentifier, PrescriberRef } from './types';

/** A Practitioner's resource id is kept as an identifier of this system, so `Practitioner/<id>` finds it in later messages. */
export const PRACTITIONER_ID_SYSTEM = 'urn:ebbline:fhir-id:Practitioner';
/** An identifier sent without a system is kept under the empty system. */
export const NO_SYSTEM = '';

const fhirId = z.string(required('a string')).regex(/^[A-Za-z0-9\-.]{1,64}$/, 'must be a FHIR id (1–64 letters, digits, - or .)');
const optionalText = z.string(required('a string')).optional();
const identifierList = z
	.array(z.looseObject({ system: optionalText, value: z.string(required('a string')) }, required('an Identifier')), required('a list of Identifiers'))
	.optional();
const contactPointList = z
	.array(
		z.looseObject({ system: optionalText, value: optionalText, use: optionalText }, required('a ContactPoint (system, value)')),
		required('a list of ContactPoints')
	)
	.optional();
const codeableConcept = z.looseObject(
	{
		coding: z.array(z.looseObject({ system: optionalText, code: optionalText, display: optionalText }), required('a list of codings')).optional(),
		text: optionalText
	},
	required('a CodeableConcept')
);
const reference = z.looseObject(
	{
		reference: optionalText,
		identifier: z.looseObject({ system: optionalText, value: z.string(required('a string')) }, required('an Identifier')).optional(),
		display: optionalText
	},
	required('a Reference')
);

const practitionerSchema = z.looseObject({
	resourceType: z.literal('Practitioner'),
	id: fhirId.optional(),
	identifier: identifierList,
	name: z
		.array(
			z.looseObject(
				{
					use: optionalText,
					text: optionalText,
					family: optionalText,
					given: z.array(z.string(required('a string')), required('a list of names')).optional(),
					prefix: z.array(z.string(required('a string')), required('a list of prefixes')).optional()
				},
				required('a HumanName')
			),
			required('a list of HumanNames')
		)
		.optional(),
	telecom: contactPointList
});

const practitionerRoleSchema = z.looseObject({
	resourceType: z.literal('PractitionerRole'),
	id: fhirId.optional(),
	identifier: identifierList,
	active: z.boolean(required('true or false')).optional(),
	practitioner: reference,
	organization: reference.optional(),
	code: z.array(codeableConcept, required('a list of CodeableConcepts')).optional(),
	specialty: z.array(codeableConcept, required('a list of CodeableConcepts')).optional(),
	telecom: contactPointList
});

export type ReferenceIn = { reference?: string; identifier?: { system?: string; value: string }; display?: string };

// ── E-mail ────────────────────────────────────────────────────────────────────────────────────────
const emailSchema = z.email();
const MAX_EMAIL_CHARS = 254;

const clip = (text: string) => (text.length > 60 ? `${text.slice(0, 57)}…` : text);

/** A usable e-mail address in lower case (a mailto: prefix is dropped), or why the text is not one. */
export function readEmailAddress(text: string): { ok: true; email: string } | { ok: false; problem: string } {
	const trimmed = text
		.trim()
		.replace(/^mailto:/i, '')
		.trim();
	if (!trimmed) return { ok: false, problem: 'the e-mail address is empty' };
	const email = trimmed.toLowerCase();
	if (email.length > MAX_EMAIL_CHARS || !emailSchema.safeParse(email).success) {
		return { ok: false, problem: `'${clip(text.trim())}' is not an e-mail address` };
	}
	return { ok: true, email };
}

type ContactPoint = { system?: string; value?: string; use?: string };

/** Current work addresses first, old ones last (FHIR ContactPoint.use). */
function useRank(c: ContactPoint): number {
	return c.use === 'old' ? 2 : c.use === 'work' ? 0 : 1;
}

/**
 * The e-mail of a Practitioner or PractitionerRole: the first usable `telecom` entry with system
 * email (work before others, old last). When there is none, `problem` says why.
 */
export function emailFromTelecom(telecom: ContactPoint[] | undefined): { email: string | null; problem: string | null } {
	const emails = (telecom ?? []).filter((c) => c.system?.trim().toLowerCase() === 'email').sort((a, b) => useRank(a) - useRank(b));
	if (emails.length === 0) return { email: null, problem: 'no e-mail in telecom' };
	let firstProblem: string | null = null;
	for (const c of emails) {
		const read = readEmailAddress(c.value ?? '');
		if (read.ok) return { email: read.email, problem: null };
		firstProblem ??= read.problem;
	}
	return { email: null, problem: firstProblem };
}

// ── Names and concepts ────────────────────────────────────────────────────────────────────────────
type HumanName = { use?: string; text?: string; family?: string; given?: string[]; prefix?: string[] };

/** The official (else usual, else first) name as one line: its text, else prefix, given and family names. */
export function humanNameText(names: HumanName[] | undefined): string | null {
	if (!names || names.length === 0) return null;
	const name = names.find((n) => n.use === 'official') ?? names.find((n) => n.use === 'usual') ?? names[0];
	const text =
		name.text?.trim() ||
		[...(name.prefix ?? []), ...(name.given ?? []), name.family ?? '']
			.map((w) => w.trim())
			.filter(Boolean)
			.join(' ');
	return text || null;
}

type Concept = { coding?: { code?: string; display?: string }[]; text?: string };
function conceptText(concepts: Concept[] | undefined): string | null {
	const c = concepts?.[0];
	if (!c) return null;
	return c.text?.trim() || c.coding?.find((x) => x.display?.trim())?.display?.trim() || c.coding?.find((x) => x.code?.trim())?.code?.trim() || null;
}

// ── Practitioner ──────────────────────────────────────────────────────────────────────────────────
type FieldIdentifier = PrescriberIdentifier & { field: string };

/** A Practitioner entry as a directory record, or the field at fault. */
export function readPractitioner(item: EntryIn): PractitionerRecord | Failure {
	const parsed = practitionerSchema.safeParse(item.resource);
	if (!parsed.success) return firstIssue(parsed.error);
	const p = parsed.data;
	const identifiers: FieldIdentifier[] = [];
	for (const [i, id] of (p.identifier ?? []).entries()) {
		const value = id.value.trim();
		if (!value) return fail(`identifier[${i}].value`, `identifier[${i}].value is empty`);
		const system = id.system?.trim() ?? NO_SYSTEM;
		if (!identifiers.some((x) => x.system === system && x.value === value)) identifiers.push({ system, value, field: `identifier[${i}]` });
	}
	const name = humanNameText(p.name);
	if (!name && identifiers.length === 0) {
		return fail('name', "name and identifier are both missing: send the prescriber's name or an identifier so that Ebbline can tell who this is");
	}
	if (p.id) identifiers.push({ system: PRACTITIONER_ID_SYSTEM, value: p.id, field: 'id' });
	const notes: string[] = [];
	const { email, problem } = emailFromTelecom(p.telecom);
	const shownName = name ?? `Prescriber ${identifiers[0].value}`;
	if (!name) notes.push(`name is missing: shown as '${shownName}' until a message names them`);
	return {
		kind: 'practitioner',
		index: item.index,
		primary: true,
		key: p.id ? `Practitioner/${p.id}` : (item.fullUrl ?? `entry[${item.index}]`),
		sourceId: p.id ?? null,
		name: shownName,
		named: name !== null,
		identifiers,
		email,
		emailProblem: problem,
		notes
	};
}

const identifierLabel = (i: PrescriberIdentifier) =>
	i.system === PRACTITIONER_ID_SYSTEM ? `Practitioner/${i.value}` : i.system ? `${i.system}|${i.value}` : i.value;

/**
 * One identifier names one prescriber: when two different Practitioners of one message carry the
 * same identifier, the first keeps it and each later one is rejected, naming the identifier.
 */
export function findIdentifierClashes(list: PractitionerRecord[]): { record: PractitionerRecord; field: string; reason: string }[] {
	const owner = new Map<string, PractitionerRecord>();
	const clashes: { record: PractitionerRecord; field: string; reason: string }[] = [];
	for (const record of list) {
		const clash = (record.identifiers as FieldIdentifier[]).find((i) => {
			const first = owner.get(`${i.system}|${i.value}`);
			return first !== undefined && first.key !== record.key;
		});
		if (clash) {
			const first = owner.get(`${clash.system}|${clash.value}`) as PractitionerRecord;
			clashes.push({
				record,
				field: clash.field,
				reason: `${clash.field} ${identifierLabel(clash)} also names ${first.key.startsWith('entry[') ? 'another Practitioner' : first.key} (entry ${first.index}) in this message: one identifier must name one prescriber`
			});
			continue;
		}
		for (const i of record.identifiers) if (!owner.has(`${i.system}|${i.value}`)) owner.set(`${i.system}|${i.value}`, record);
	}
	return clashes;
}

// ── References to a prescriber ───────────────────────────────────────────────────────────────────
/** Practitioner and PractitionerRole entries of one message, by fullUrl and by Type/id. */
export type LocalDirectory = {
	practitioners: Map<string, PractitionerRecord | Failure>;
	roles: Map<string, PractitionerRoleRecord | Failure>;
};

export function emptyDirectory(): LocalDirectory {
	return { practitioners: new Map(), roles: new Map() };
}

type RefOutcome = { ref: PrescriberRef | null; problem: string | null };

function fromLocalPractitioner(found: PractitionerRecord | Failure, field: string, label: string): RefOutcome {
	if (isFailure(found)) return { ref: null, problem: `${field} ${label} points at a Practitioner entry that was quarantined (${found.reason})` };
	return { ref: { kind: 'entry', index: found.index, label: `${field} ${label}` }, problem: null };
}

function fromLocalRole(found: PractitionerRoleRecord | Failure, field: string, label: string): RefOutcome {
	if (isFailure(found)) return { ref: null, problem: `${field} ${label} points at a PractitionerRole entry that was quarantined (${found.reason})` };
	return { ref: { ...found.practitioner, label: `${field} ${label}` }, problem: null };
}

/**
 * Who a reference names: a Practitioner (or, unless `practitionerOnly`, a PractitionerRole's
 * practitioner) in this message by fullUrl or Type/id, else one on record by resource id, role or
 * identifier. An identifier without a system that is an e-mail address may also name the prescriber
 * by e-mail. `problem` says why a reference names nobody Ebbline can find.
 */
export function prescriberRef(ref: ReferenceIn, field: string, local: LocalDirectory, practitionerOnly = false): RefOutcome {
	const text = ref.reference?.trim();
	let problem: string | null = null;
	if (text) {
		const parsed = parseReference(ref);
		if (parsed === null) problem = `${field}.reference '${clip(text)}' is not a reference Ebbline can read`;
		else if (parsed.kind === 'local') {
			const practitioner = local.practitioners.get(parsed.url);
			const role = practitionerOnly ? undefined : local.roles.get(parsed.url);
			if (practitioner) return fromLocalPractitioner(practitioner, `${field}.reference`, parsed.url);
			if (role) return fromLocalRole(role, `${field}.reference`, parsed.url);
			problem = `${field}.reference ${parsed.url} matches no ${practitionerOnly ? 'Practitioner' : 'Practitioner or PractitionerRole'} entry in this message`;
		} else if (parsed.kind === 'typed' && parsed.type === 'Practitioner') {
			const label = `Practitioner/${parsed.id}`;
			const found = local.practitioners.get(label);
			if (found) return fromLocalPractitioner(found, `${field}.reference`, label);
			return {
				ref: { kind: 'identifier', identifier: { system: PRACTITIONER_ID_SYSTEM, value: parsed.id }, anySystem: false, label: `${field} ${label}` },
				problem: null
			};
		} else if (parsed.kind === 'typed' && parsed.type === 'PractitionerRole' && !practitionerOnly) {
			const label = `PractitionerRole/${parsed.id}`;
			const found = local.roles.get(label);
			if (found) return fromLocalRole(found, `${field}.reference`, label);
			return { ref: { kind: 'role', sourceKey: label, label: `${field} ${label}` }, problem: null };
		} else if (parsed.kind === 'typed') {
			problem = `${field}.reference points at a ${parsed.type}; Ebbline links a ${practitionerOnly ? 'Practitioner' : 'Practitioner or PractitionerRole'}`;
		}
	}
	const value = ref.identifier?.value?.trim();
	if (value) {
		const system = ref.identifier?.system?.trim() || null;
		const label = system ? `${field}.identifier ${system}|${value}` : `${field}.identifier ${value}`;
		const asEmail = system === null || /^(mailto|email|urn:ietf:rfc:3986)$/i.test(system) ? readEmailAddress(value) : null;
		if (asEmail?.ok) {
			return { ref: { kind: 'email', email: asEmail.email, name: ref.display?.trim() || null, label }, problem: null };
		}
		return { ref: { kind: 'identifier', identifier: { system: system ?? NO_SYSTEM, value }, anySystem: system === null, label }, problem: null };
	}
	return { ref: null, problem };
}

/** The requester of a MedicationRequest: the prescriber it names, and a note when it names nobody Ebbline can find. */
export function readRequester(requester: ReferenceIn | undefined, local: LocalDirectory): { ref: PrescriberRef | null; notes: string[] } {
	if (!requester) return { ref: null, notes: [] };
	const { ref, problem } = prescriberRef(requester, 'requester', local);
	if (ref) return { ref, notes: [] };
	if (problem) return { ref: null, notes: [`${problem}; the order is kept with no prescriber from the directory`] };
	return { ref: null, notes: ['requester gives no reference or identifier: the order is kept with no prescriber from the directory'] };
}

// ── PractitionerRole ──────────────────────────────────────────────────────────────────────────────
/** A PractitionerRole entry: its practitioner must be in this message or on record. */
export function readPractitionerRole(item: EntryIn, local: LocalDirectory): PractitionerRoleRecord | Failure {
	const parsed = practitionerRoleSchema.safeParse(item.resource);
	if (!parsed.success) return firstIssue(parsed.error);
	const r = parsed.data;
	const firstIdentifier = r.identifier?.find((i) => i.value.trim());
	const sourceKey = firstIdentifier
		? `${firstIdentifier.system?.trim() ?? NO_SYSTEM}|${firstIdentifier.value.trim()}`
		: r.id
			? `PractitionerRole/${r.id}`
			: null;
	if (!sourceKey) return fail('id', 'id or identifier is required: Ebbline keeps one row per PractitionerRole and needs to recognise it when it is sent again');
	const who = prescriberRef(r.practitioner, 'practitioner', local, true);
	if (!who.ref) return fail('practitioner', who.problem ?? 'practitioner needs a reference (Practitioner/<id> or a fullUrl in this message) or an identifier');
	const notes: string[] = [];
	const hasEmail = (r.telecom ?? []).some((c) => c.system?.trim().toLowerCase() === 'email');
	const { email, problem } = emailFromTelecom(r.telecom);
	if (hasEmail && problem) notes.push(`the role's e-mail is not stored: ${problem}`);
	return {
		kind: 'practitioner-role',
		index: item.index,
		primary: true,
		sourceKey,
		sourceId: r.id ?? null,
		practitioner: who.ref,
		role: conceptText(r.code),
		specialty: conceptText(r.specialty),
		organization: r.organization?.display?.trim() || null,
		email,
		active: r.active ?? null,
		notes
	};
}
