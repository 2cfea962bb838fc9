// Units and plausibility for inbound results. Creatinine is stored in mg/dL and albumin in g/L (the
// clinical core's internal units), weight in kg and height in cm; the value and unit as received are
// kept beside the normalised value.
import { CM_PER_INCH, CREATININE_UMOL_L_PER_MG_DL, KG_PER_POUND } from '../../clinical/units';

export type Measure = 'creatinine' | 'albumin' | 'weight' | 'height';
/** LOINC property: mass or substance (molar) concentration, or a body size quantity. */
export type LoincProperty = 'mass-concentration' | 'molar-concentration' | 'mass' | 'length';

/** The LOINC codes Ebbline reads (LOINC, Regenstrief Institute; names from the LOINC table). */
export const LOINC_CODES: Record<string, { measure: Measure; property: LoincProperty; name: string }> = {
	'2160-0': { measure: 'creatinine', property: 'mass-concentration', name: 'Creatinine [Mass/volume] in Serum or Plasma' },
	'14682-9': { measure: 'creatinine', property: 'molar-concentration', name: 'Creatinine [Moles/volume] in Serum or Plasma' },
	'77140-2': { measure: 'creatinine', property: 'molar-concentration', name: 'Creatinine [Moles/volume] in Serum, Plasma or Blood' },
	'1751-7': { measure: 'albumin', property: 'mass-concentration', name: 'Albumin [Mass/volume] in Serum or Plasma' },
	'29463-7': { measure: 'weight', property: 'mass', name: 'Body weight' },
	'8302-2': { measure: 'height', property: 'length', name: 'Body height' }
};

/** The LOINC code a CSV row stands for when it names the test instead of giving a code. */
export function loincFor(measure: Measure, property: LoincProperty): string {
	if (measure === 'creatinine') return property === 'molar-concentration' ? '14682-9' : '2160-0';
	if (measure === 'albumin') return '1751-7';
	return measure === 'weight' ? '29463-7' : '8302-2';
}

type UnitRule = { property: LoincProperty; toNormalised: (value: number) => number };

/**
 * Accepted UCUM codes per measure and the factor to the stored unit. Factors: creatinine 1 mg/dL =
 * 88.4 µmol/L (KDIGO AKI guideline 2012, molar mass 113.12 g/mol); 1 dL = 0.1 L (UCUM); 1 [lb_av] =
 * 0.45359237 kg and 1 [in_i] = 2.54 cm exactly (international yard and pound, 1959; UCUM).
 */
const UNIT_RULES: Record<Measure, Record<string, UnitRule>> = {
	creatinine: {
		'mg/dL': { property: 'mass-concentration', toNormalised: (v) => v },
		'mg/L': { property: 'mass-concentration', toNormalised: (v) => v / 10 },
		'umol/L': { property: 'molar-concentration', toNormalised: (v) => v / CREATININE_UMOL_L_PER_MG_DL },
		'mmol/L': { property: 'molar-concentration', toNormalised: (v) => (v * 1000) / CREATININE_UMOL_L_PER_MG_DL }
	},
	albumin: {
		'g/L': { property: 'mass-concentration', toNormalised: (v) => v },
		'g/dL': { property: 'mass-concentration', toNormalised: (v) => v * 10 }
	},
	weight: {
		kg: { property: 'mass', toNormalised: (v) => v },
		g: { property: 'mass', toNormalised: (v) => v / 1000 },
		'[lb_av]': { property: 'mass', toNormalised: (v) => v * KG_PER_POUND }
	},
	height: {
		cm: { property: 'length', toNormalised: (v) => v },
		m: { property: 'length', toNormalised: (v) => v * 100 },
		mm: { property: 'length', toNormalised: (v) => v / 10 },
		'[in_i]': { property: 'length', toNormalised: (v) => v * CM_PER_INCH }
	}
};

/** Common spellings that are not UCUM codes but mean one unambiguously (printed units, micro sign). */
const UNIT_ALIASES: Record<string, string> = {
	'µmol/l': 'umol/L',
	'μmol/l': 'umol/L',
	'umol/l': 'umol/L',
	'mmol/l': 'mmol/L',
	'mg/dl': 'mg/dL',
	'mg/l': 'mg/L',
	'g/l': 'g/L',
	'g/dl': 'g/dL',
	kg: 'kg',
	g: 'g',
	lb: '[lb_av]',
	lbs: '[lb_av]',
	'[lb_av]': '[lb_av]',
	cm: 'cm',
	m: 'm',
	mm: 'mm',
	in: '[in_i]',
	'[in_i]': '[in_i]'
};

export const STORED_UNIT: Record<Measure, string> = { creatinine: 'mg/dL', albumin: 'g/L', weight: 'kg', height: 'cm' };

/**
 * Plausible ranges of the stored value; outside them the record goes to quarantine so that a value
 * sent in the wrong unit (1.1 labelled µmol/L, 4.1 labelled g/L) is caught (common practice: chosen
 * wide enough for severe AKI, nephrotic syndrome and adult extremes of body size).
 */
export const PLAUSIBLE: Record<Measure, { min: number; max: number }> = {
	creatinine: { min: 0.1, max: 25 }, // mg/dL (≈ 9–2,210 µmol/L)
	albumin: { min: 5, max: 70 }, // g/L
	weight: { min: 20, max: 400 }, // kg
	height: { min: 100, max: 250 } // cm
};

export function acceptedUnits(measure: Measure): string[] {
	return Object.keys(UNIT_RULES[measure]);
}

/** The UCUM code for a received unit, or null when Ebbline does not know it. */
export function canonicalUnit(unit: string): string | null {
	const trimmed = unit.trim();
	if (trimmed in UNIT_ALIASES) return UNIT_ALIASES[trimmed];
	return UNIT_ALIASES[trimmed.toLowerCase()] ?? (Object.values(UNIT_RULES).some((r) => trimmed in r) ? trimmed : null);
}

export type Normalised =
	| { ok: true; measure: Measure; loinc: string; value: number; unit: string; valueNormalised: number; unitNormalised: string }
	| { ok: false; field: 'unit' | 'value' | 'code'; reason: string };

const PROPERTY_WORDS: Record<LoincProperty, string> = {
	'mass-concentration': 'a mass concentration',
	'molar-concentration': 'a molar (substance) concentration',
	mass: 'a mass',
	length: 'a length'
};

function round(value: number, digits = 4) {
	return Number(value.toFixed(digits));
}

/**
 * Normalises one value. `loinc` null means the sender named the test only (CSV): the LOINC code is
 * then chosen from the unit's property. Messages name what is wrong and what would be right.
 */
export function normaliseValue(measure: Measure, value: number, unit: string, loinc: string | null): Normalised {
	if (!Number.isFinite(value)) return { ok: false, field: 'value', reason: 'must be a number' };
	if (value <= 0) return { ok: false, field: 'value', reason: `must be greater than 0 (got ${value})` };
	const code = canonicalUnit(unit);
	const rule = code === null ? undefined : UNIT_RULES[measure][code];
	if (!rule) {
		const what = measure === 'creatinine' || measure === 'albumin' ? 'a concentration' : measure === 'weight' ? 'a mass' : 'a length';
		return {
			ok: false,
			field: 'unit',
			reason: `unit '${unit}' is not ${what} Ebbline accepts for ${measure}; send one of ${acceptedUnits(measure).join(', ')} (UCUM)`
		};
	}
	const loincCode = loinc ?? loincFor(measure, rule.property);
	const meta = LOINC_CODES[loincCode];
	if (meta && meta.property !== rule.property) {
		const better = loincFor(measure, rule.property);
		return {
			ok: false,
			field: 'unit',
			reason: `unit '${unit}' is ${PROPERTY_WORDS[rule.property]} but LOINC ${loincCode} is ${PROPERTY_WORDS[meta.property]}; send LOINC ${better} with this unit`
		};
	}
	const normalised = rule.toNormalised(value);
	const range = PLAUSIBLE[measure];
	if (normalised < range.min || normalised > range.max) {
		const shown = code === STORED_UNIT[measure] ? '' : ` (= ${round(normalised, 3)} ${STORED_UNIT[measure]})`;
		return {
			ok: false,
			field: 'value',
			reason: `${value} ${unit}${shown} is outside the plausible range for ${measure} (${range.min}–${range.max} ${STORED_UNIT[measure]}): check the value and its unit`
		};
	}
	return {
		ok: true,
		measure,
		loinc: loincCode,
		value,
		unit: code as string,
		valueNormalised: round(normalised, 6),
		unitNormalised: STORED_UNIT[measure]
	};
}

/** How far ahead of the server clock a result time may be (clock skew between systems; common practice). */
export const FUTURE_TOLERANCE_MS = 5 * 60_000;

/** ISO 8601 date-time with an explicit offset (FHIR dateTime with a time must carry one). */
const DATE_TIME = /^(\d{4})-(\d{2})-(\d{2})T(\d{2}):(\d{2})(?::(\d{2})(?:\.\d+)?)?(Z|[+-]\d{2}:\d{2})$/;

export type ParsedTime = { ok: true; at: Date } | { ok: false; reason: string };

export function parseDateTime(text: string, now: Date, what = 'time'): ParsedTime {
	const trimmed = text.trim();
	const m = DATE_TIME.exec(trimmed);
	if (!m) {
		return {
			ok: false,
			reason: `'${text}' is not an ISO 8601 date-time with an offset, e.g. 2026-03-02T06:15:00Z or 2026-03-02T06:15:00+01:00`
		};
	}
	const at = new Date(trimmed);
	const [, y, mo, d, h, mi] = m.map(Number);
	// Date would roll 30 February over into March; the calendar day must exist
	const daysInMonth = new Date(Date.UTC(y, mo, 0)).getUTCDate();
	if (Number.isNaN(at.getTime()) || mo < 1 || mo > 12 || d < 1 || d > daysInMonth || h > 23 || mi > 59) {
		return { ok: false, reason: `'${text}' is not a valid date-time` };
	}
	if (y < 1900) return { ok: false, reason: `'${text}' is before 1900` };
	if (at.getTime() > now.getTime() + FUTURE_TOLERANCE_MS) {
		return { ok: false, reason: `${what} ${trimmed} is in the future (server time ${now.toISOString()})` };
	}
	return { ok: true, at };
}

export type ParsedDate = { ok: true; date: string } | { ok: false; reason: string };

/** A calendar date YYYY-MM-DD (FHIR date), not in the future. */
export function parseDate(text: string, now: Date): ParsedDate {
	const trimmed = text.trim();
	const m = /^(\d{4})-(\d{2})-(\d{2})$/.exec(trimmed);
	if (!m) return { ok: false, reason: `'${text}' is not a date in the form YYYY-MM-DD` };
	const at = new Date(`${trimmed}T00:00:00Z`);
	if (Number.isNaN(at.getTime()) || at.toISOString().slice(0, 10) !== trimmed) return { ok: false, reason: `'${text}' is not a valid date` };
	if (Number(m[1]) < 1900) return { ok: false, reason: `'${text}' is before 1900` };
	if (at.getTime() > now.getTime()) return { ok: false, reason: `${trimmed} is in the future` };
	return { ok: true, date: trimmed };
}

export const ADULT_AGE_YEARS = 18;

/** Hours in one FHIR Timing period unit (UCUM time units as FHIR uses them). */
export const HOURS_PER_UNIT: Record<string, number> = { min: 1 / 60, h: 1, d: 24, wk: 168 };
