// FHIR R4 intake: the Bundle envelope (a 400 when it is wrong) and its entries, each read by the reader
// of its resource type (fhir-patient, fhir-medication, fhir-administration, fhir-results; Practitioner and PractitionerRole
// in practitioner.ts) into a normalised record or a rejection that names the field at fault.
import { z } from 'zod';
import { fail, isFailure, parseReference, required, type EntryIn, type Failure, type ParseContext } from './fhir-common';
import { readMedicationAdministration } from './fhir-administration';
import { readMedicationRequest } from './fhir-medication';
import { readEncounter, readPatient } from './fhir-patient';
import { readCondition, readObservation, readProcedure } from './fhir-results';
import { emptyDirectory, findIdentifierClashes, readPractitioner, readPractitionerRole, type LocalDirectory } from './practitioner';
import type { IntakeRecord, PatientRecord, PatientRef, PractitionerRecord, Rejection } from './types';

export const MAX_BUNDLE_ENTRIES = 10_000;
export const ACCEPTED_RESOURCES = [
	'Patient',
	'Encounter',
	'MedicationRequest',
	'MedicationAdministration',
	'Observation',
	'Procedure',
	'Condition',
	'Practitioner',
	'PractitionerRole'
] as const;

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
	const localRequests = new Map<string, string>();
	for (const item of items) {
		if (!item.fullUrl || typeof item.resource.id !== 'string') continue;
		if (item.resource.resourceType === 'Encounter') localEncounters.set(item.fullUrl, item.resource.id);
		if (item.resource.resourceType === 'MedicationRequest') localRequests.set(item.fullUrl, item.resource.id);
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
					: type === 'MedicationAdministration'
						? readMedicationAdministration(item, ctx, patientRef, localRequests)
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
