// Units and plausibility of inbound results, cross-checked with the UCUM reference implementation
// (@lhncbc/ucum-lhc, U.S. National Library of Medicine) where a conversion is involved.
import ucum from '@lhncbc/ucum-lhc';
import { describe, expect, it } from 'vitest';
import { ageOnDate as ageYears } from '../../../../src/lib/clinical';
import { canonicalUnit, normaliseValue, parseDate, parseDateTime, PLAUSIBLE } from '../../../../src/lib/server/feed';
import { NOW } from './helpers';

const utils = ucum.UcumLhcUtils.getInstance();
function viaUcum(from: string, value: number, to: string, molecularWeight?: number): number {
	const res = utils.convertUnitTo(from, value, to, molecularWeight === undefined ? {} : { molecularWeight });
	expect(res.status, JSON.stringify(res.msg)).toBe('succeeded');
	return res.toVal as number;
}
const ok = (r: ReturnType<typeof normaliseValue>) => {
	if (!r.ok) throw new Error(r.reason);
	return r;
};

describe('unit conversions to the stored units', () => {
	it.each([
		['creatinine', 106, 'umol/L', '14682-9', 'mg/dL'],
		['creatinine', 0.106, 'mmol/L', '14682-9', 'mg/dL'],
		['creatinine', 12, 'mg/L', '2160-0', 'mg/dL'],
		['albumin', 3.2, 'g/dL', '1751-7', 'g/L'],
		['weight', 176, '[lb_av]', '29463-7', 'kg'],
		['weight', 72500, 'g', '29463-7', 'kg'],
		['height', 68, '[in_i]', '8302-2', 'cm'],
		['height', 1.72, 'm', '8302-2', 'cm']
	] as const)('%s %f %s', (measure, value, unit, loinc, stored) => {
		const r = ok(normaliseValue(measure, value, unit, loinc));
		// creatinine molar mass 113.12 g/mol (KDIGO 2012 uses 88.4 µmol/L per mg/dL); others are exact UCUM definitions
		const expected = measure === 'creatinine' ? viaUcum(unit, value, stored, 113.12) : viaUcum(unit, value, stored);
		expect(r.valueNormalised).toBeCloseTo(expected, 3);
		expect(r.unitNormalised).toBe(stored);
	});

	it('keeps the received value and UCUM code beside the normalised value', () => {
		expect(ok(normaliseValue('creatinine', 88.4, 'umol/L', '14682-9'))).toMatchObject({ value: 88.4, unit: 'umol/L', valueNormalised: 1 });
	});

	it('reads common printed spellings as their UCUM code', () => {
		// the micro sign (U+00B5) and the Greek mu (U+03BC) both mean micro (UCUM prints "u")
		expect(canonicalUnit('µmol/L')).toBe('umol/L');
		expect(canonicalUnit('μmol/l')).toBe('umol/L');
		expect(canonicalUnit('lb')).toBe('[lb_av]');
		expect(canonicalUnit('in')).toBe('[in_i]');
		expect(canonicalUnit('MG/DL')).toBe('mg/dL');
		expect(canonicalUnit('furlong')).toBeNull();
	});

	it('chooses the LOINC code from the unit when a CSV names the test only', () => {
		expect(ok(normaliseValue('creatinine', 1.1, 'mg/dL', null)).loinc).toBe('2160-0');
		expect(ok(normaliseValue('creatinine', 97, 'umol/L', null)).loinc).toBe('14682-9');
	});
});

describe('rejections name what is wrong', () => {
	it('refuses a unit that is not a concentration for creatinine', () => {
		expect(normaliseValue('creatinine', 1.2, 'kg', '2160-0')).toMatchObject({ ok: false, field: 'unit' });
	});
	it('refuses a molar unit on a mass-concentration LOINC code, and says which code to use', () => {
		const r = normaliseValue('creatinine', 106, 'umol/L', '2160-0');
		expect(r).toMatchObject({ ok: false, field: 'unit' });
		expect(!r.ok && r.reason).toContain('send LOINC 14682-9');
	});
	it('refuses zero, negative and non-finite values', () => {
		for (const v of [0, -1, Number.NaN, Infinity]) expect(normaliseValue('albumin', v, 'g/L', '1751-7').ok).toBe(false);
	});
	it('catches a value sent in the wrong unit through the plausible range', () => {
		// 1.1 labelled µmol/L would be 0.012 mg/dL; 4.1 labelled g/L is an albumin in g/dL (common practice ranges)
		expect(normaliseValue('creatinine', 1.1, 'umol/L', '14682-9')).toMatchObject({ ok: false, field: 'value' });
		expect(normaliseValue('albumin', 4.1, 'g/L', '1751-7')).toMatchObject({ ok: false, field: 'value' });
		expect(normaliseValue('creatinine', PLAUSIBLE.creatinine.max, 'mg/dL', '2160-0').ok).toBe(true);
		expect(normaliseValue('creatinine', PLAUSIBLE.creatinine.max + 0.1, 'mg/dL', '2160-0').ok).toBe(false);
	});
});

describe('dates and times', () => {
	it('accepts ISO 8601 date-times with an offset and converts them to UTC', () => {
		expect(parseDateTime('2026-11-30T07:15:00+01:00', NOW)).toEqual({ ok: true, at: new Date('2026-11-30T06:15:00Z') });
		expect(parseDateTime('2026-11-30T06:15Z', NOW).ok).toBe(true);
	});
	it('refuses a time without an offset, an impossible date and a time in the future', () => {
		expect(parseDateTime('2026-11-30T06:15:00', NOW).ok).toBe(false);
		expect(parseDateTime('2026-02-30T06:15:00Z', NOW).ok).toBe(false);
		const future = parseDateTime('2026-12-01T12:30:00Z', NOW);
		expect(!future.ok && future.reason).toContain('in the future');
		// up to five minutes of clock skew between systems is tolerated (common practice)
		expect(parseDateTime('2026-12-01T12:04:00Z', NOW).ok).toBe(true);
	});
	it('reads birth dates and completed years', () => {
		expect(parseDate('1951-05-14', NOW)).toEqual({ ok: true, date: '1951-05-14' });
		expect(parseDate('1951-02-29', NOW).ok).toBe(false);
		expect(ageYears('2008-12-01', NOW)).toBe(18);
		expect(ageYears('2008-12-02', NOW)).toBe(17);
	});
});
