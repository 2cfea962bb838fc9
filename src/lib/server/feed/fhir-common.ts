// What every FHIR reader shares: the datatypes, references, the failure that names the field at fault,
// and the ids derived for results sent without one.
import { createHash } from 'node:crypto';
import { z } from 'zod';
import type { AgentIndex } from './agent-map';
import { parseDateTime } from './normalise';
import type { PatientRef } from './types';

export const LOINC_SYSTEM = 'http://loinc.org';
export const SNOMED_SYSTEM = 'http://snomed.info/sct';

export const required = (what: string) => ({
	error: (issue: { input: unknown }) => (issue.input === undefined ? 'is required' : `must be ${what}`)
});

// ── Datatypes ──────────────────────────────────────────────────────────────────────────────
export const fhirId = z.string(required('a string')).regex(/^[A-Za-z0-9\-.]{1,64}$/, 'must be a FHIR id (1–64 letters, digits, - or .)');
export const text = z.string(required('a string'));
export const coding = z.looseObject({ system: z.string().optional(), code: z.string().optional(), display: z.string().optional() });
export const codeableConcept = z.looseObject({ coding: z.array(coding).optional(), text: z.string().optional() });
export const reference = z.looseObject(
	{
		reference: z.string().optional(),
		identifier: z.looseObject({ system: z.string().optional(), value: text }).optional(),
		display: z.string().optional()
	},
	required('a Reference')
);
export const quantity = z.looseObject(
	{
		value: z.number(required('a number')),
		unit: z.string().optional(),
		system: z.string().optional(),
		code: z.string().optional()
	},
	required('a Quantity')
);
export const period = z.looseObject({ start: z.string().optional(), end: z.string().optional() });

// ── Paths and references ───────────────────────────────────────────────────────────────────────────────────────
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

export type Ref = { kind: 'typed'; type: string; id: string } | { kind: 'local'; url: string } | { kind: 'identifier'; value: string };

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

export type ParseContext = { now: Date; agents: AgentIndex };

export type EntryIn = { index: number; fullUrl: string | null; resource: Record<string, unknown> };
/** The field at fault and the reason, which names it. */
export type Failure = { field: string; reason: string };
export const fail = (field: string, reason: string): Failure => ({ field, reason });

/** A stable id for a result sent without one, so that re-sending it is recognised. */
export function derivedId(parts: (string | number)[]): string {
	return 'h:' + createHash('sha256').update(parts.join('|')).digest('hex').slice(0, 32);
}

/** Resolves a resource's subject to the patient it concerns, or the field at fault. */
export type RefFn = (subject: { reference?: string; identifier?: { value: string } } | undefined) => PatientRef | Failure;
export const isFailure = (x: unknown): x is Failure => typeof x === 'object' && x !== null && 'reason' in x && 'field' in x;

/** The end of a period when one is given (null when not): a date-time not before `start`. */
export function endAfter(text: string | undefined, field: string, start: Date, now: Date, beforeStart: string): Date | null | Failure {
	if (!text) return null;
	const end = parseDateTime(text, now, field);
	if (!end.ok) return fail(field, `${field} ${end.reason}`);
	if (end.at < start) return fail(field, beforeStart);
	return end.at;
}
