// FHIR results: Observations (creatinine, albumin, body size and drug levels by LOINC), dialysis Procedures and the
// dialysis Condition (SNOMED CT); entered-in-error withdraws one sent before.
import { z } from 'zod';
import {
	codeableConcept,
	coding,
	derivedId,
	endAfter,
	fail,
	fhirId,
	firstIssue,
	isFailure,
	LOINC_SYSTEM,
	period,
	quantity,
	reference,
	required,
	SNOMED_SYSTEM,
	type EntryIn,
	type Failure,
	type ParseContext,
	type RefFn
} from './fhir-common';
import { LEVEL_CODES, normaliseLevel } from './drug-levels';
import { LOINC_CODES, normaliseValue, parseDateTime } from './normalise';
import type { IntakeRecord, LevelRecord, PatientRef, RenalReplacementRecord } from './types';

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

const OBSERVATION_OK = new Set(['final', 'amended', 'corrected', 'preliminary']);

export function readObservation(item: EntryIn, ctx: ParseContext, patientRef: RefFn): IntakeRecord | Failure {
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
	const level = loincCodings.find((c) => LEVEL_CODES[c.code as string]);
	if (level) return readLevel(item, ctx, patientRef, o, level.code as string);
	const known = loincCodings.find((c) => LOINC_CODES[c.code as string]);
	if (!known) {
		const c = loincCodings[0];
		return fail(
			'code.coding',
			`code.coding LOINC ${c.code}${c.display ? ` (${c.display})` : ''} is not one Ebbline reads; accepted: ${[...Object.keys(LOINC_CODES), ...Object.keys(LEVEL_CODES)].join(', ')}`
		);
	}
	const loinc = known.code as string;
	const patient = patientRef(o.subject);
	if (isFailure(patient)) return patient;
	const at = observedAt(o, ctx);
	if (isFailure(at)) return at;
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
		(item.fullUrl?.startsWith('urn:') ? item.fullUrl : derivedId([patient.sourceId ?? '', patient.mrn ?? '', loinc, at.toISOString(), n.value, n.unit]));
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
		observedAt: at
	};
}

type ObservationIn = z.infer<typeof observationSchema>;

/** When the sample was taken: effective[x], else issued; not in the future. */
function observedAt(o: ObservationIn, ctx: ParseContext): Date | Failure {
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
	return at.ok ? at.at : fail(timeField, `${timeField} ${at.reason}`);
}

/** A drug level (LEVEL_CODES): the agent from the code, the value in mg/L. */
function readLevel(item: EntryIn, ctx: ParseContext, patientRef: RefFn, o: ObservationIn, loinc: string): LevelRecord | Failure {
	const code = LEVEL_CODES[loinc];
	const agent = ctx.agents.byAtc.get(code.agentCode);
	if (!agent)
		return fail('code.coding', `code.coding LOINC ${loinc} is a ${code.agent} level, but ${code.agent} (${code.agentCode}) is not in the agent library`);
	if (!agent.active) return fail('code.coding', `code.coding LOINC ${loinc} is a ${code.agent} level, but ${agent.name} is disabled in the agent library`);
	const patient = patientRef(o.subject);
	if (isFailure(patient)) return patient;
	const at = observedAt(o, ctx);
	if (isFailure(at)) return at;
	if (!o.valueQuantity) return fail('valueQuantity', 'valueQuantity is required (a number with a UCUM unit: mg/L or ug/mL)');
	const unit = (o.valueQuantity.code ?? o.valueQuantity.unit ?? '').trim();
	const unitField = o.valueQuantity.code !== undefined ? 'valueQuantity.code' : 'valueQuantity.unit';
	if (!unit) return fail('valueQuantity.code', 'valueQuantity.code is required: the UCUM unit (mg/L or ug/mL)');
	const n = normaliseLevel(o.valueQuantity.value, unit, code);
	if (!n.ok) {
		const field = n.field === 'unit' ? unitField : 'valueQuantity.value';
		return fail(field, `${field}: ${n.reason}`);
	}
	const sourceId =
		o.id ??
		(item.fullUrl?.startsWith('urn:')
			? item.fullUrl
			: derivedId([patient.sourceId ?? '', patient.mrn ?? '', loinc, at.toISOString(), o.valueQuantity.value, n.unit]));
	return {
		kind: 'level',
		index: item.index,
		primary: true,
		sourceId,
		patient,
		agentId: agent.id,
		agentName: agent.name,
		loinc,
		timing: code.timing,
		value: o.valueQuantity.value,
		unit: n.unit,
		valueMgL: n.valueMgL,
		observedAt: at
	};
}

const PROCEDURE_COUNTS = new Set(['completed', 'in-progress']);
const PROCEDURE_IGNORED = new Set(['not-done', 'preparation', 'on-hold', 'stopped', 'unknown']);

function snomedCodes(concept: { coding: { system?: string; code?: string }[] }): string[] {
	return concept.coding.filter((c) => c.system === SNOMED_SYSTEM && c.code).map((c) => c.code as string);
}

/** A dialysis session or programme on record for the patient. */
function renalEvent(item: EntryIn, patient: PatientRef, event: Omit<RenalReplacementRecord, 'kind' | 'index' | 'primary' | 'patient'>): RenalReplacementRecord {
	return { kind: 'renal-replacement', index: item.index, primary: true, patient, ...event };
}

/** A dialysis session (SNOMED CT dialysis procedures); entered-in-error withdraws one sent before. */
export function readProcedure(item: EntryIn, ctx: ParseContext, patientRef: RefFn): IntakeRecord | Failure {
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
		return renalEvent(item, patient, { sourceId: `Procedure/${p.id}`, eventKind: 'session', mode, from: ctx.now, to: null, remove: true });
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
	const to = endAfter(p.performedPeriod?.end, 'performedPeriod.end', start.at, ctx.now, 'performedPeriod.end is before performedPeriod.start');
	if (isFailure(to)) return to;
	return renalEvent(item, patient, { sourceId: `Procedure/${p.id}`, eventKind: 'session', mode, from: start.at, to, remove: false });
}

/** "CKD stage 5 on dialysis": an ongoing programme while active, ended by its abatement. */
export function readCondition(item: EntryIn, ctx: ParseContext, patientRef: RefFn): IntakeRecord | Failure {
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
		return renalEvent(item, patient, { sourceId: `Condition/${c.id}`, eventKind: 'condition', mode: 'ihd', from: ctx.now, to: null, remove: true });
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
	const ended = ['inactive', 'remission', 'resolved'].includes(status);
	if (ended && !c.abatementDateTime) return fail('abatementDateTime', `abatementDateTime is required when clinicalStatus is ${status}: when dialysis ended`);
	const to = ended ? endAfter(c.abatementDateTime, 'abatementDateTime', onset.at, ctx.now, 'abatementDateTime is before the onset') : null;
	if (isFailure(to)) return to;
	// the modality is not in the condition: intermittent haemodialysis unless a PD session is on record (the timeline decides)
	return renalEvent(item, patient, { sourceId: `Condition/${c.id}`, eventKind: 'condition', mode: 'ihd', from: onset.at, to, remove: false });
}
