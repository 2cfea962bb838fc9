// The calculation trace of a stored assessment. New assessments keep their inputs, not their trace
// (a trace is about ten times larger), and the trace is re-run from those inputs when someone opens it.
import { assess, reviveAssessInput, type Assessment, type StoredAssessInput, type TraceStep } from '../../clinical';

export type AssessmentTrace = {
	steps: TraceStep[];
	/** set when the re-run no longer gives the stored numbers (the clinical core changed since) */
	note: string | null;
};

export const TRACE_DIFFERS_NOTE =
	'This trace was re-run from the stored inputs by a newer version of the calculation and its numbers differ from those stored with the assessment; the figures above are the stored ones.';

/** JSON equality regardless of key order (jsonb stores keys in its own order). */
function sameJson(a: unknown, b: unknown): boolean {
	if (a === b) return true;
	if (typeof a !== 'object' || typeof b !== 'object' || a === null || b === null) return false;
	if (Array.isArray(a) !== Array.isArray(b)) return false;
	const ka = Object.keys(a).filter((k) => (a as Record<string, unknown>)[k] !== undefined);
	const kb = Object.keys(b).filter((k) => (b as Record<string, unknown>)[k] !== undefined);
	if (ka.length !== kb.length) return false;
	return ka.every((k) => sameJson((a as Record<string, unknown>)[k], (b as Record<string, unknown>)[k]));
}

export function assessmentTrace(row: { result: Omit<Assessment, 'trace'>; input: StoredAssessInput | null; trace: TraceStep[] | null }): AssessmentTrace {
	if (row.trace) return { steps: row.trace, note: null };
	if (!row.input) return { steps: [], note: 'No trace was kept for this assessment.' };
	const { trace, ...result } = assess(reviveAssessInput(row.input));
	const same = sameJson(JSON.parse(JSON.stringify(result)), row.result);
	return { steps: trace, note: same ? null : TRACE_DIFFERS_NOTE };
}
