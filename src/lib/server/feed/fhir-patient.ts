// FHIR Patient and Encounter: who the patient is (MRN, name, sex, an adult's birth date) and where.
import { z } from 'zod';
import {
	codeableConcept,
	endAfter,
	fail,
	fhirId,
	firstIssue,
	isFailure,
	reference,
	required,
	text,
	type EntryIn,
	type Failure,
	type ParseContext,
	type RefFn
} from './fhir-common';
import { ageOnDate } from '../../clinical/age';
import { ADULT_AGE_YEARS, parseDate, parseDateTime } from './normalise';
import type { IntakeRecord, PatientRecord } from './types';

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

export function readPatient(item: EntryIn, ctx: ParseContext): PatientRecord | Failure {
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

export function readEncounter(item: EntryIn, ctx: ParseContext, patientRef: RefFn): IntakeRecord | Failure {
	const parsed = encounterSchema.safeParse(item.resource);
	if (!parsed.success) return firstIssue(parsed.error);
	const e = parsed.data;
	const patient = patientRef(e.subject);
	if (isFailure(patient)) return patient;
	const start = parseDateTime(e.period.start, ctx.now, 'period.start');
	if (!start.ok) return fail('period.start', `period.start ${start.reason}`);
	const dischargedAt = endAfter(e.period.end, 'period.end', start.at, ctx.now, 'period.end is before period.start');
	if (isFailure(dischargedAt)) return dischargedAt;
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
