// CSV intake for lab results, orders, doses given and drug levels (csv-levels.ts): documented columns, templates, and one row at a time
// into the same normalised records as FHIR (same units, plausibility and agent mapping).
import { ageOnDate } from '../../clinical/age';
import type { Route } from '../../domain/vocabulary';
import Papa from 'papaparse';
import { doseInAgentTerms, matchAgent, type AgentIndex } from './agent-map';
import { readAdministrationRow, readLevelRow } from './csv-levels';
import { derivedId } from './fhir-common';
import { MAX_DOSE_MG, MAX_INTERVAL_H, MIN_INTERVAL_H } from './fhir-medication';
import { ADULT_AGE_YEARS, acceptedUnits, canonicalUnit, LOINC_CODES, normaliseValue, parseDate, parseDateTime, type Measure } from './normalise';
import { readEmailAddress } from './practitioner';
import type { IntakeRecord, PatientRecord, PatientRef, PrescriberRef } from './types';
import { CSV_COLUMNS, type CsvKind, type CsvRow, type RowError } from '../../feed/csv-format';

export {
	CSV_CHUNK_ROWS,
	CSV_COLUMNS,
	CSV_KINDS,
	CSV_MAX_ROWS,
	isCsvKind,
	type CsvColumn,
	type CsvKind,
	type CsvRow,
	type RowError
} from '../../feed/csv-format';

export function normaliseHeader(name: string): string {
	return name.trim().toLowerCase().replace(/\s+/g, '_');
}

export function checkHeader(kind: CsvKind, header: string[]): { missing: string[]; unknown: string[] } {
	const have = new Set(header.map(normaliseHeader));
	const known = new Set(CSV_COLUMNS[kind].map((c) => c.name));
	return {
		missing: CSV_COLUMNS[kind].filter((c) => c.required && !have.has(c.name)).map((c) => c.name),
		unknown: [...have].filter((h) => h && !known.has(h))
	};
}

/** A template with the header and one example row. */
export function templateCsv(kind: CsvKind): string {
	const columns = CSV_COLUMNS[kind];
	return Papa.unparse({ fields: columns.map((c) => c.name), data: [columns.map((c) => c.example)] }, { newline: '\n' }) + '\n';
}

/** Parses CSV text (server side: tests, fixtures); line 1 is the header, so the first row is line 2. */
export function parseCsvText(text: string): { header: string[]; rows: CsvRow[] } {
	const result = Papa.parse<Record<string, string>>(text.replace(/^\uFEFF/, ''), {
		header: true,
		skipEmptyLines: 'greedy',
		transformHeader: normaliseHeader
	});
	const header = result.meta.fields ?? [];
	return { header, rows: result.data.map((values, i) => ({ line: i + 2, values })) };
}

/** Re-serialises rows for the raw copy kept with the feed message. */
export function rowsToCsv(header: string[], rows: CsvRow[]): string {
	return Papa.unparse({ fields: header, data: rows.map((r) => header.map((h) => r.values[h] ?? '')) }, { newline: '\n' });
}

const NUMBER = /^[+-]?(\d+(\.\d*)?|\.\d+)$/;

function num(value: string): number | null {
	const t = value.trim();
	return NUMBER.test(t) ? Number(t) : null;
}

const MEASURE_NAMES: Record<string, Measure> = { creatinine: 'creatinine', albumin: 'albumin', weight: 'weight', height: 'height' };

export type RowContext = { now: Date; agents: AgentIndex };
type RowResult = { ok: true; records: IntakeRecord[] } | { ok: false; error: RowError };

function err(line: number, column: string, reason: string): RowResult {
	return { ok: false, error: { line, column, reason } };
}

function patientFrom(row: CsvRow, mrn: string, ctx: RowContext): PatientRecord | RowError | null {
	const v = row.values;
	const given = v.given_name?.trim() ?? '';
	const family = v.family_name?.trim() ?? '';
	const birth = v.birth_date?.trim() ?? '';
	const sex = v.sex?.trim().toLowerCase() ?? '';
	if (!given && !family && !birth && !sex) return null;
	if (!birth) return { line: row.line, column: 'birth_date', reason: 'birth_date is required when patient columns are given' };
	const b = parseDate(birth, ctx.now);
	if (!b.ok) return { line: row.line, column: 'birth_date', reason: b.reason };
	if (ageOnDate(b.date, ctx.now) < ADULT_AGE_YEARS) {
		return { line: row.line, column: 'birth_date', reason: `the patient is under ${ADULT_AGE_YEARS}; Ebbline's renal equations are for adults` };
	}
	const s = sex === 'f' ? 'female' : sex === 'm' ? 'male' : sex;
	if (s !== 'female' && s !== 'male') return { line: row.line, column: 'sex', reason: `sex '${v.sex ?? ''}' must be female or male` };
	return { kind: 'patient', index: row.line, primary: false, sourceId: null, mrn, givenName: given, familyName: family, birthDate: b.date, sex: s };
}

function dateTime(row: CsvRow, column: string, ctx: RowContext): Date | RowError {
	const t = parseDateTime(row.values[column] ?? '', ctx.now, column);
	return t.ok ? t.at : { line: row.line, column, reason: t.reason };
}

const isError = (x: unknown): x is RowError => typeof x === 'object' && x !== null && 'reason' in x && 'line' in x;

export function readResultRow(row: CsvRow, ctx: RowContext): RowResult {
	const v = row.values;
	const mrn = v.mrn?.trim();
	if (!mrn) return err(row.line, 'mrn', 'mrn is required');
	const testText = v.test?.trim() ?? '';
	const loincGiven = LOINC_CODES[testText] ? testText : null;
	const measure = loincGiven ? LOINC_CODES[loincGiven].measure : MEASURE_NAMES[testText.toLowerCase()];
	if (!measure) return err(row.line, 'test', `test '${testText}' is not one Ebbline reads: creatinine, albumin, weight, height or their LOINC codes`);
	const valueText = v.value?.trim() ?? '';
	if (!valueText) return err(row.line, 'value', 'value is required');
	const value = num(valueText);
	if (value === null) {
		return err(row.line, 'value', `value '${valueText}' is not a number: use a decimal point and no unit or thousands separator`);
	}
	const unitText = v.unit?.trim() ?? '';
	if (!unitText) return err(row.line, 'unit', `unit is required: ${acceptedUnits(measure).join(', ')}`);
	const n = normaliseValue(measure, value, unitText, loincGiven);
	if (!n.ok) return err(row.line, n.field === 'unit' ? 'unit' : 'value', n.reason);
	const at = dateTime(row, 'observed_at', ctx);
	if (isError(at)) return { ok: false, error: at };
	const patient = patientFrom(row, mrn, ctx);
	if (isError(patient)) return { ok: false, error: patient };
	const ref: PatientRef = { mrn, label: `MRN ${mrn}`, field: 'mrn' };
	const resultId = v.result_id?.trim();
	const records: IntakeRecord[] = patient ? [patient] : [];
	records.push({
		kind: 'result',
		index: row.line,
		primary: true,
		sourceId: resultId || derivedId([mrn, n.loinc, at.toISOString(), n.value, n.unit]),
		patient: ref,
		measure: n.measure,
		loinc: n.loinc,
		value: n.value,
		unit: n.unit,
		valueNormalised: n.valueNormalised,
		unitNormalised: n.unitNormalised,
		observedAt: at
	});
	return { ok: true, records };
}

const ROUTES: Record<string, Route> = { iv: 'iv', intravenous: 'iv', po: 'po', oral: 'po', im: 'im', intramuscular: 'im' };

export function readOrderRow(row: CsvRow, ctx: RowContext): RowResult {
	const v = row.values;
	const mrn = v.mrn?.trim();
	if (!mrn) return err(row.line, 'mrn', 'mrn is required');
	const orderId = v.order_id?.trim();
	if (!orderId) return err(row.line, 'order_id', 'order_id is required');
	const status = (v.status?.trim().toLowerCase() || 'active') as string;
	if (status === 'stopped') {
		let stoppedAt = ctx.now;
		if (v.stopped_at?.trim()) {
			const t = dateTime(row, 'stopped_at', ctx);
			if (isError(t)) return { ok: false, error: t };
			stoppedAt = t;
		}
		return { ok: true, records: [{ kind: 'stop', index: row.line, primary: true, sourceId: orderId, stoppedAt }] };
	}
	if (status !== 'active') return err(row.line, 'status', `status '${v.status}' must be active or stopped`);
	const agentText = v.agent?.trim() ?? '';
	if (!agentText) return err(row.line, 'agent', 'agent is required');
	const match = matchAgent(ctx.agents, [{ code: agentText, display: agentText }]);
	if (!match.ok) return err(row.line, 'agent', match.reason);
	const doseMg = num(v.dose_mg ?? '');
	if (doseMg === null) return err(row.line, 'dose_mg', `dose_mg '${v.dose_mg ?? ''}' is not a number`);
	if (doseMg <= 0 || doseMg > MAX_DOSE_MG) return err(row.line, 'dose_mg', `dose_mg ${doseMg} must be greater than 0 and at most ${MAX_DOSE_MG}`);
	const inTerms = doseInAgentTerms(match.agent, doseMg, v.dose_basis?.trim() || null);
	if (!inTerms.ok) return err(row.line, 'dose_basis', inTerms.reason);
	const intervalH = num(v.interval_h ?? '');
	if (intervalH === null) return err(row.line, 'interval_h', `interval_h '${v.interval_h ?? ''}' is not a number`);
	if (intervalH < MIN_INTERVAL_H || intervalH > MAX_INTERVAL_H) {
		return err(row.line, 'interval_h', `interval_h ${intervalH} must lie between ${MIN_INTERVAL_H} and ${MAX_INTERVAL_H} hours`);
	}
	const route = ROUTES[v.route?.trim().toLowerCase() ?? ''];
	if (!route) return err(row.line, 'route', `route '${v.route ?? ''}' must be iv, po or im`);
	let infusionH = route === 'iv' ? match.agent.usualInfusionH : 0;
	if (v.infusion_h?.trim()) {
		const given = num(v.infusion_h);
		if (given === null || given < 0) return err(row.line, 'infusion_h', `infusion_h '${v.infusion_h}' must be a number of hours ≥ 0`);
		infusionH = given;
	}
	if (infusionH > intervalH) return err(row.line, 'infusion_h', `infusion_h ${infusionH} is longer than interval_h ${intervalH}`);
	const startAt = dateTime(row, 'start_at', ctx);
	if (isError(startAt)) return { ok: false, error: startAt };
	const patient = patientFrom(row, mrn, ctx);
	if (isError(patient)) return { ok: false, error: patient };
	const ref: PatientRef = { mrn, label: `MRN ${mrn}`, field: 'mrn' };
	const records: IntakeRecord[] = patient ? [patient] : [];
	let encounterSourceId: string | null = null;
	const ward = v.ward?.trim();
	if (ward) {
		let admittedAt = startAt;
		if (v.admitted_at?.trim()) {
			const t = dateTime(row, 'admitted_at', ctx);
			if (isError(t)) return { ok: false, error: t };
			admittedAt = t;
		}
		encounterSourceId = `csv:${mrn}:${admittedAt.toISOString()}`;
		records.push({
			kind: 'encounter',
			index: row.line,
			primary: false,
			sourceId: encounterSourceId,
			patient: ref,
			ward,
			bed: v.bed?.trim() || null,
			admittedAt,
			dischargedAt: null
		});
	}
	const prescriber = prescriberOf(row);
	if (isError(prescriber)) return { ok: false, error: prescriber };
	records.push({
		kind: 'order',
		index: row.line,
		primary: true,
		sourceId: orderId,
		patient: ref,
		encounterSourceId,
		agentId: match.agent.id,
		doseMg: inTerms.doseMg,
		intervalH,
		infusionH,
		route,
		status: 'active',
		startAt,
		stoppedAt: null,
		prescriberName: prescriber.name,
		prescriber: prescriber.ref,
		notes: []
	});
	return { ok: true, records };
}

/**
 * The row's prescriber: prescriber_email (lower case) finds or adds them in the directory, with
 * prescriber_name as their name; the older single prescriber column holds a name or an address.
 */
export function prescriberOf(row: CsvRow): { name: string | null; ref: PrescriberRef | null } | RowError {
	const v = row.values;
	const older = v.prescriber?.trim() || '';
	const olderIsEmail = older.includes('@');
	const name = v.prescriber_name?.trim() || (older && !olderIsEmail ? older : '') || null;
	const column = v.prescriber_email?.trim() ? 'prescriber_email' : olderIsEmail ? 'prescriber' : null;
	if (column === null) return { name, ref: null };
	const text = v[column] as string;
	const read = readEmailAddress(text);
	if (!read.ok) return { line: row.line, column, reason: `${column} ${read.problem}` };
	return { name, ref: { kind: 'email', email: read.email, name, label: `${column} ${read.email}` } };
}

export function readRow(kind: CsvKind, row: CsvRow, ctx: RowContext): RowResult {
	if (kind === 'administrations') return readAdministrationRow(row, ctx);
	if (kind === 'levels') return readLevelRow(row, ctx);
	return kind === 'results' ? readResultRow(row, ctx) : readOrderRow(row, ctx);
}

/** A file that reports one analyte in two units is legal but deserves a second look. */
export function unitWarnings(kind: CsvKind, rows: CsvRow[]): string[] {
	if (kind !== 'results') return [];
	const units = new Map<string, Set<string>>();
	for (const row of rows) {
		const test = row.values.test?.trim() ?? '';
		const measure = LOINC_CODES[test]?.measure ?? MEASURE_NAMES[test.toLowerCase()];
		const unit = canonicalUnit(row.values.unit ?? '');
		if (!measure || !unit) continue;
		if (!units.has(measure)) units.set(measure, new Set());
		units.get(measure)?.add(unit);
	}
	return [...units]
		.filter(([, set]) => set.size > 1)
		.map(([measure, set]) => `${measure} arrives in ${set.size} units in this file (${[...set].join(', ')}): check that each row's unit matches its value`);
}
