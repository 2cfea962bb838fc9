// FHIR MedicationAdministration: a dose actually given, tied to its order through `request`, or with
// status not-done a scheduled dose the ward did not give; sent as entered-in-error, it marks the stored
// one (kept on record, left out of the kinetics).
import { z } from 'zod';
import { ADMINISTRATION_STATUSES } from '../../domain/vocabulary';
import {
	codeableConcept,
	derivedId,
	endAfter,
	fail,
	fhirId,
	firstIssue,
	isFailure,
	parseReference,
	period,
	quantity,
	reference,
	required,
	type EntryIn,
	type Failure,
	type ParseContext,
	type RefFn
} from './fhir-common';
import { agentOfConcept, doseQuantityMg } from './fhir-medication';
import type { LibraryAgent } from './agent-map';
import { parseDateTime } from './normalise';
import type { AdministrationRecord, AdministrationStatus, OrderRef } from './types';

const administrationSchema = z.looseObject({
	resourceType: z.literal('MedicationAdministration'),
	id: fhirId.optional(),
	status: z.string(required('a string')),
	medicationCodeableConcept: codeableConcept.optional(),
	medicationReference: reference.optional(),
	subject: reference,
	effectiveDateTime: z.string().optional(),
	effectivePeriod: period.optional(),
	request: reference.optional(),
	dosage: z.looseObject({ dose: quantity.optional(), rateQuantity: quantity.optional(), rateRatio: z.unknown().optional() }, required('a Dosage')).optional()
});

const STATUSES = new Set<string>(ADMINISTRATION_STATUSES);
const UNSETTLED = new Set(['on-hold', 'unknown']);
const HOUR_MS = 3_600_000;

/** The order named by `request`: MedicationRequest/<id>, a bundle fullUrl of one, or its identifier. */
export function orderRefOf(request: z.infer<typeof reference> | undefined, localRequests: Map<string, string>): OrderRef | Failure {
	if (!request) return fail('request', 'request is required: a reference to the MedicationRequest (the order) this dose was given for');
	const ref = parseReference(request);
	if (ref === null) return fail('request.reference', 'request needs a reference (MedicationRequest/<id> or a bundle fullUrl) or an identifier');
	if (ref.kind === 'identifier') return { sourceId: ref.value, label: `order ${ref.value}`, field: 'request.identifier' };
	if (ref.kind === 'local') {
		const id = localRequests.get(ref.url);
		if (!id) return fail('request.reference', `request.reference ${ref.url} matches no MedicationRequest entry in this bundle`);
		return { sourceId: id, label: `MedicationRequest/${id}`, field: 'request.reference' };
	}
	if (ref.type !== 'MedicationRequest') return fail('request.reference', `request.reference must point at a MedicationRequest (got ${ref.type})`);
	return { sourceId: ref.id, label: `MedicationRequest/${ref.id}`, field: 'request.reference' };
}

export function readMedicationAdministration(
	item: EntryIn,
	ctx: ParseContext,
	patientRef: RefFn,
	localRequests: Map<string, string>
): AdministrationRecord | Failure {
	const base = { kind: 'administration' as const, index: item.index, primary: true };
	if (item.resource.status === 'entered-in-error') {
		// only the id is needed: the rest of the resource may be sent as before, or not at all
		const marked = z.looseObject({ id: fhirId }).safeParse(item.resource);
		if (!marked.success) return fail('id', 'id is required to mark an administration sent in error');
		return {
			...base,
			sourceId: marked.data.id,
			markOnly: true,
			patient: null,
			order: null,
			agentId: null,
			status: 'entered-in-error',
			startAt: ctx.now,
			endAt: null,
			doseValue: 0,
			doseUnit: 'mg',
			doseMg: 0
		};
	}
	const parsed = administrationSchema.safeParse(item.resource);
	if (!parsed.success) return firstIssue(parsed.error);
	const a = parsed.data;
	if (UNSETTLED.has(a.status))
		return fail(
			'status',
			`status '${a.status}' does not say whether the dose was given; send completed, in-progress or stopped once it was, or not-done if it was not`
		);
	if (!STATUSES.has(a.status as AdministrationStatus)) {
		return fail(
			'status',
			`status '${a.status}' is not a MedicationAdministration status Ebbline reads; send completed, in-progress, stopped, not-done or entered-in-error`
		);
	}
	const patient = patientRef(a.subject);
	if (isFailure(patient)) return patient;
	const order = orderRefOf(a.request, localRequests);
	if (isFailure(order)) return order;

	let agent: LibraryAgent | null = null;
	if (a.medicationCodeableConcept) {
		const named = agentOfConcept(ctx.agents, a.medicationCodeableConcept);
		if (isFailure(named)) return named;
		agent = named;
	} else if (!a.medicationReference) {
		return fail('medicationCodeableConcept', 'medicationCodeableConcept is required (ATC or RxNorm code, or the agent name)');
	}
	// a medicationReference alone: the order's agent stands (checked when stored)

	const startText = a.effectivePeriod?.start ?? a.effectiveDateTime;
	const startField = a.effectivePeriod?.start ? 'effectivePeriod.start' : 'effectiveDateTime';
	if (!startText)
		return fail('effectiveDateTime', 'effectiveDateTime or effectivePeriod.start is required: when the dose was given (or, not-done, when it was due)');
	const start = parseDateTime(startText, ctx.now, startField);
	if (!start.ok) return fail(startField, `${startField} ${start.reason}`);

	if (!a.dosage?.dose) return fail('dosage.dose', 'dosage.dose is required: the amount given (or, not-done, the amount due), in mg or g (UCUM)');
	const dose = doseQuantityMg(a.dosage.dose, 'dosage.dose', agent);
	if (isFailure(dose)) return dose;
	const doseMg = dose.doseMg;

	let endAt: Date | null = null;
	if (a.effectivePeriod?.end) {
		const end = endAfter(a.effectivePeriod.end, 'effectivePeriod.end', start.at, ctx.now, 'effectivePeriod.end is before effectivePeriod.start');
		if (isFailure(end)) return end;
		endAt = end;
	} else if (a.dosage?.rateQuantity) {
		const rate = a.dosage.rateQuantity;
		const rateUnit = (rate.code ?? rate.unit ?? '').trim();
		const perHour = rateUnit === 'mg/h' ? 1 : rateUnit === 'g/h' ? 1000 : rateUnit === 'mg/min' ? 60 : null;
		if (perHour === null || !(rate.value > 0)) {
			return fail(
				'dosage.rateQuantity',
				`dosage.rateQuantity must be a positive rate in mg/h, g/h or mg/min (got ${rate.value} ${rateUnit || 'without a unit'}); or send effectivePeriod.end`
			);
		}
		endAt = new Date(start.at.getTime() + (doseMg / (rate.value * perHour)) * HOUR_MS);
	} else if (a.dosage?.rateRatio !== undefined) {
		return fail('dosage.rateRatio', 'dosage.rateRatio is not read; send dosage.rateQuantity in mg/h or effectivePeriod.end');
	}
	const sourceId = a.id ?? (item.fullUrl?.startsWith('urn:') ? item.fullUrl : derivedId([order.sourceId, start.at.toISOString(), doseMg]));
	return {
		...base,
		sourceId,
		markOnly: false,
		patient,
		order,
		agentId: agent?.id ?? null,
		status: a.status as AdministrationStatus,
		startAt: start.at,
		endAt,
		doseValue: a.dosage.dose.value,
		doseUnit: dose.unitText,
		doseMg
	};
}
