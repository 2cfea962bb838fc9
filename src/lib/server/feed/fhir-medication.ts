// FHIR MedicationRequest: an anti-infective order (agent, dose, interval, infusion, route, requester),
// or its stop.
import type { Route } from '../../domain/vocabulary';
import { z } from 'zod';
import { doseInAgentTerms, matchAgent, type AgentIndex, type AgentMention, type LibraryAgent } from './agent-map';
import {
	codeableConcept,
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
import { HOURS_PER_UNIT, parseDateTime } from './normalise';
import { readRequester, type LocalDirectory } from './practitioner';
import type { IntakeRecord } from './types';

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

/** The library agent a medicationCodeableConcept names: by its codings (ATC, RxNorm), then its text. */
export function agentOfConcept(agents: AgentIndex, concept: z.infer<typeof codeableConcept>): LibraryAgent | Failure {
	const mentions: AgentMention[] = [
		...(concept.coding ?? []).map((c) => ({ system: c.system ?? null, code: c.code ?? null, display: c.display ?? null })),
		{ text: concept.text ?? null }
	];
	const match = matchAgent(agents, mentions);
	return match.ok ? match.agent : fail('medicationCodeableConcept', `medicationCodeableConcept: ${match.reason}`);
}

/**
 * A dose Quantity (`field` names it in messages) in mg: mg or g (UCUM), with an optional annotation
 * naming the dose basis of a combination product (mg{trimethoprim}, mg{combined}), put in the agent's
 * terms when the agent is known; greater than 0 and at most MAX_DOSE_MG.
 */
export function doseQuantityMg(dose: z.infer<typeof quantity>, field: string, agent: LibraryAgent | null): { doseMg: number; unitText: string } | Failure {
	const unitText = (dose.code ?? dose.unit ?? '').trim();
	const annotated = /^([^{}]*)\{([^{}]*)\}$/.exec(unitText);
	const unit = annotated ? annotated[1].trim() : unitText;
	const factor = DOSE_UNITS[unit];
	if (factor === undefined) return fail(`${field}.code`, `${field} unit '${unitText}' is not accepted; send mg or g (UCUM)`);
	if (!(dose.value > 0)) return fail(`${field}.value`, `${field}.value must be greater than 0 (got ${dose.value})`);
	let doseMg = dose.value * factor;
	if (agent) {
		const inTerms = doseInAgentTerms(agent, doseMg, annotated ? annotated[2] : null);
		if (!inTerms.ok) return fail(`${field}.code`, `${field}: ${inTerms.reason}`);
		doseMg = inTerms.doseMg;
	}
	if (doseMg > MAX_DOSE_MG) return fail(`${field}.value`, `${field} ${dose.value} ${unit} is above the largest plausible dose (${MAX_DOSE_MG} mg)`);
	return { doseMg, unitText };
}

const STOPPING = new Set(['stopped', 'cancelled', 'completed', 'entered-in-error']);
export function readMedicationRequest(
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
	const agent = agentOfConcept(ctx.agents, m.medicationCodeableConcept);
	if (isFailure(agent)) return agent;

	const dosage = m.dosageInstruction?.[0];
	if (!dosage) return fail('dosageInstruction', 'dosageInstruction is required (dose, timing and route)');
	const d = 'dosageInstruction[0]';
	const dose = doseQuantityMg(dosage.doseAndRate[0].doseQuantity, `${d}.doseAndRate[0].doseQuantity`, agent);
	if (isFailure(dose)) return dose;
	const doseMg = dose.doseMg;
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
		infusionH = route === 'iv' ? agent.usualInfusionH : 0;
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
		agentId: agent.id,
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
