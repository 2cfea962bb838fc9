// FHIR MedicationAdministration: a dose actually given, tied to its order through `request`; sent as
// entered-in-error, it marks the stored one (kept on record, left out of the kinetics).
import { z } from 'zod';
import { doseInAgentTerms, matchAgent, type AgentMention } from './agent-map';
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
import { MAX_DOSE_MG } from './fhir-medication';
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

const STATUSES = new Set<AdministrationStatus>(['completed', 'in-progress', 'stopped', 'entered-in-error']);
const NOT_GIVEN = new Set(['not-done', 'on-hold', 'unknown']);
const DOSE_UNITS: Record<string, number> = { mg: 1, g: 1000 };
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
	if (NOT_GIVEN.has(a.status))
		return fail('status', `status '${a.status}': no dose was given, so there is nothing to record; send completed, in-progress, stopped or entered-in-error`);
	if (!STATUSES.has(a.status as AdministrationStatus)) {
		return fail(
			'status',
			`status '${a.status}' is not a MedicationAdministration status Ebbline reads; send completed, in-progress, stopped or entered-in-error`
		);
	}
	const patient = patientRef(a.subject);
	if (isFailure(patient)) return patient;
	const order = orderRefOf(a.request, localRequests);
	if (isFailure(order)) return order;

	let agentId: string | null = null;
	if (a.medicationCodeableConcept) {
		const mentions: AgentMention[] = [
			...(a.medicationCodeableConcept.coding ?? []).map((c) => ({ system: c.system ?? null, code: c.code ?? null, display: c.display ?? null })),
			{ text: a.medicationCodeableConcept.text ?? null }
		];
		const match = matchAgent(ctx.agents, mentions);
		if (!match.ok) return fail('medicationCodeableConcept', `medicationCodeableConcept: ${match.reason}`);
		agentId = match.agent.id;
	} else if (!a.medicationReference) {
		return fail('medicationCodeableConcept', 'medicationCodeableConcept is required (ATC or RxNorm code, or the agent name)');
	}
	// a medicationReference alone: the order's agent stands (checked when stored)

	const startText = a.effectivePeriod?.start ?? a.effectiveDateTime;
	const startField = a.effectivePeriod?.start ? 'effectivePeriod.start' : 'effectiveDateTime';
	if (!startText) return fail('effectiveDateTime', 'effectiveDateTime or effectivePeriod.start is required: when the dose was given');
	const start = parseDateTime(startText, ctx.now, startField);
	if (!start.ok) return fail(startField, `${startField} ${start.reason}`);

	const dose = a.dosage?.dose;
	if (!dose) return fail('dosage.dose', 'dosage.dose is required: the amount given, in mg or g (UCUM)');
	const unitText = (dose.code ?? dose.unit ?? '').trim();
	const annotated = /^([^{}]*)\{([^{}]*)\}$/.exec(unitText);
	const unit = annotated ? annotated[1].trim() : unitText;
	const factor = DOSE_UNITS[unit];
	if (factor === undefined) return fail('dosage.dose.code', `dosage.dose unit '${unitText}' is not accepted; send mg or g (UCUM)`);
	if (!(dose.value > 0)) return fail('dosage.dose.value', `dosage.dose.value must be greater than 0 (got ${dose.value})`);
	let doseMg = dose.value * factor;
	if (agentId) {
		const agent = ctx.agents.agents.find((x) => x.id === agentId);
		const inTerms = agent ? doseInAgentTerms(agent, doseMg, annotated ? annotated[2] : null) : { ok: true as const, doseMg };
		if (!inTerms.ok) return fail('dosage.dose.code', `dosage.dose: ${inTerms.reason}`);
		doseMg = inTerms.doseMg;
	}
	if (doseMg > MAX_DOSE_MG) return fail('dosage.dose.value', `dosage.dose ${dose.value} ${unit} is above the largest plausible dose (${MAX_DOSE_MG} mg)`);

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
		agentId,
		status: a.status as AdministrationStatus,
		startAt: start.at,
		endAt,
		doseValue: dose.value,
		doseUnit: unitText,
		doseMg
	};
}
