// CSV rows of doses given and of measured drug levels, read into the same records as the FHIR
// MedicationAdministration and drug-level Observation.
import type { LevelTiming } from '../../clinical/levels-types';
import { ADMINISTRATION_STATUSES } from '../../domain/vocabulary';
import { matchAgent, nameKey, type AgentIndex } from './agent-map';
import { derivedId } from './fhir-common';
import { MAX_DOSE_MG } from './fhir-medication';
import { LEVEL_CODES, levelCodeFor, normaliseLevel, LEVEL_UNITS_ACCEPTED } from './drug-levels';
import { parseDateTime } from './normalise';
import type { AdministrationRecord, AdministrationStatus, IntakeRecord, PatientRef } from './types';
import type { CsvRow, RowError } from '../../feed/csv-format';

type RowContext = { now: Date; agents: AgentIndex };
type RowResult = { ok: true; records: IntakeRecord[] } | { ok: false; error: RowError };

const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)$/;
const err = (line: number, column: string, reason: string): RowResult => ({ ok: false, error: { line, column, reason } });
const TIMINGS: Record<string, LevelTiming> = { trough: 'trough', 'pre-dose': 'trough', predose: 'trough', peak: 'peak', 'post-dose': 'peak', random: 'random' };

function number(row: CsvRow, column: string): number | RowError {
	const text = row.values[column]?.trim() ?? '';
	if (!text) return { line: row.line, column, reason: `${column} is required` };
	if (!NUMBER.test(text))
		return { line: row.line, column, reason: `${column} '${text}' is not a number: use a decimal point and no unit or thousands separator` };
	return Number(text);
}

function time(row: CsvRow, column: string, ctx: RowContext): Date | RowError {
	const t = parseDateTime(row.values[column] ?? '', ctx.now, column);
	return t.ok ? t.at : { line: row.line, column, reason: t.reason };
}

const isError = (x: unknown): x is RowError => typeof x === 'object' && x !== null && 'reason' in x && 'line' in x;

export function readAdministrationRow(row: CsvRow, ctx: RowContext): RowResult {
	const v = row.values;
	const status = (v.status?.trim().toLowerCase() || 'completed') as AdministrationStatus;
	if (!ADMINISTRATION_STATUSES.includes(status))
		return err(row.line, 'status', `status '${v.status}' must be completed, in-progress, stopped, not-done (the dose was not given) or entered-in-error`);
	const id = v.administration_id?.trim();
	const base = { kind: 'administration' as const, index: row.line, primary: true };
	if (status === 'entered-in-error') {
		if (!id) return err(row.line, 'administration_id', 'administration_id is required to mark an administration entered-in-error');
		const mark: AdministrationRecord = {
			...base,
			sourceId: id,
			markOnly: true,
			patient: null,
			order: null,
			agentId: null,
			status,
			startAt: ctx.now,
			endAt: null,
			doseValue: 0,
			doseUnit: 'mg',
			doseMg: 0
		};
		return { ok: true, records: [mark] };
	}
	const mrn = v.mrn?.trim();
	if (!mrn) return err(row.line, 'mrn', 'mrn is required');
	const orderId = v.order_id?.trim();
	if (!orderId) return err(row.line, 'order_id', 'order_id is required: the order the dose was given for');
	const dose = number(row, 'dose_mg');
	if (isError(dose)) return { ok: false, error: dose };
	if (dose <= 0 || dose > MAX_DOSE_MG) return err(row.line, 'dose_mg', `dose_mg ${dose} must be greater than 0 and at most ${MAX_DOSE_MG}`);
	const startAt = time(row, 'start_at', ctx);
	if (isError(startAt)) return { ok: false, error: startAt };
	let endAt: Date | null = null;
	if (v.end_at?.trim()) {
		const end = time(row, 'end_at', ctx);
		if (isError(end)) return { ok: false, error: end };
		if (end < startAt) return err(row.line, 'end_at', 'end_at is before start_at');
		endAt = end;
	}
	let agentId: string | null = null;
	const agentText = v.agent?.trim();
	if (agentText) {
		const match = matchAgent(ctx.agents, [{ code: agentText, display: agentText }]);
		if (!match.ok) return err(row.line, 'agent', match.reason);
		agentId = match.agent.id;
	}
	const patient: PatientRef = { mrn, label: `MRN ${mrn}`, field: 'mrn' };
	const record: AdministrationRecord = {
		...base,
		sourceId: id || derivedId(['csv-administration', orderId, startAt.toISOString(), dose]),
		markOnly: false,
		patient,
		order: { sourceId: orderId, label: `order ${orderId}`, field: 'order_id' },
		agentId,
		status,
		startAt,
		endAt,
		doseValue: dose,
		doseUnit: 'mg',
		doseMg: dose
	};
	return { ok: true, records: [record] };
}

/** "vancomycin trough", "Gentamicin peak", a LOINC code of LEVEL_CODES. */
export function levelCodeOfTest(text: string): string | null {
	const t = text.trim();
	if (LEVEL_CODES[t]) return t;
	const words = t
		.toLowerCase()
		.split(/[\s,;/_]+/)
		.filter(Boolean);
	if (words.length !== 2) return null;
	const timing = TIMINGS[words[1]];
	return timing ? levelCodeFor(nameKey(words[0]), timing) : null;
}

export function readLevelRow(row: CsvRow, ctx: RowContext): RowResult {
	const v = row.values;
	const mrn = v.mrn?.trim();
	if (!mrn) return err(row.line, 'mrn', 'mrn is required');
	const testText = v.test?.trim() ?? '';
	const loinc = levelCodeOfTest(testText);
	if (!loinc) {
		return err(
			row.line,
			'test',
			`test '${testText}' is not a level Ebbline reads: vancomycin, gentamicin, tobramycin or amikacin with trough, peak or random (e.g. "vancomycin trough"), or one of the LOINC codes ${Object.keys(LEVEL_CODES).join(', ')}`
		);
	}
	const code = LEVEL_CODES[loinc];
	const agent = ctx.agents.byAtc.get(code.agentCode);
	if (!agent || !agent.active) return err(row.line, 'test', `${code.agent} (${code.agentCode}) is not an active agent of the library`);
	const value = number(row, 'value');
	if (isError(value)) return { ok: false, error: value };
	const unitText = v.unit?.trim() ?? '';
	if (!unitText) return err(row.line, 'unit', `unit is required: ${LEVEL_UNITS_ACCEPTED.join(' or ')}`);
	const n = normaliseLevel(value, unitText, code);
	if (!n.ok) return err(row.line, n.field, n.reason);
	const at = time(row, 'observed_at', ctx);
	if (isError(at)) return { ok: false, error: at };
	const id = v.level_id?.trim();
	return {
		ok: true,
		records: [
			{
				kind: 'level',
				index: row.line,
				primary: true,
				sourceId: id || derivedId([mrn, loinc, at.toISOString(), value, n.unit]),
				patient: { mrn, label: `MRN ${mrn}`, field: 'mrn' },
				agentId: agent.id,
				agentName: agent.name,
				loinc,
				timing: code.timing,
				value,
				unit: n.unit,
				valueMgL: n.valueMgL,
				observedAt: at
			}
		]
	};
}
