// Drug levels: the LOINC codes read, the units accepted (mg/L and µg/mL, the same number), and the CSV
// spelling of a test ("vancomycin trough").
import { describe, expect, it } from 'vitest';
import { LEVEL_CODES, levelCodeOfTest, normaliseLevel } from '../../../../src/lib/server/feed';

const vancoTrough = LEVEL_CODES['4092-3'];

describe('drug levels', () => {
	it('reads trough, peak and unspecified timing for each of the four agents', () => {
		for (const agent of ['vancomycin', 'gentamicin', 'tobramycin', 'amikacin']) {
			const timings = Object.values(LEVEL_CODES)
				.filter((c) => c.agent === agent)
				.map((c) => c.timing);
			expect(new Set(timings), agent).toEqual(new Set(['trough', 'peak', 'random']));
		}
		expect(LEVEL_CODES['3321-7']).toMatchObject({ agent: 'amikacin', timing: 'trough', agentCode: 'J01GB06' });
		expect(LEVEL_CODES['3319-1']).toMatchObject({ agent: 'amikacin', timing: 'peak' });
	});

	it('takes mg/L and µg/mL in their spellings, as the same number', () => {
		for (const unit of ['mg/L', 'mg/l', 'ug/mL', 'µg/mL', 'μg/mL', 'mcg/mL']) {
			expect(normaliseLevel(14.2, unit, vancoTrough), unit).toMatchObject({ ok: true, valueMgL: 14.2 });
		}
		expect(normaliseLevel(0, 'mg/L', vancoTrough)).toMatchObject({ ok: true, valueMgL: 0 });
	});

	it('refuses other units, negative and implausible values, naming what is wrong', () => {
		expect(normaliseLevel(9.5, 'umol/L', vancoTrough)).toEqual({
			ok: false,
			field: 'unit',
			reason: "unit 'umol/L' is not a mass concentration Ebbline accepts for a vancomycin level; send mg/L or ug/mL (UCUM)"
		});
		expect(normaliseLevel(9.5, 'mg/dL', vancoTrough)).toMatchObject({ ok: false, field: 'unit' });
		expect(normaliseLevel(-1, 'mg/L', vancoTrough)).toMatchObject({ ok: false, field: 'value' });
		expect(normaliseLevel(9500, 'ug/mL', vancoTrough)).toMatchObject({ ok: false, field: 'value' });
	});

	it('reads a CSV test as agent and timing, or a LOINC code', () => {
		expect(levelCodeOfTest('vancomycin trough')).toBe('4092-3');
		expect(levelCodeOfTest('Gentamicin Peak')).toBe('3663-2');
		expect(levelCodeOfTest('amikacin random')).toBe('35669-1');
		expect(levelCodeOfTest('tobramycin pre-dose')).toBe('4059-2');
		expect(levelCodeOfTest('35670-9')).toBe('35670-9');
		expect(levelCodeOfTest('teicoplanin trough')).toBeNull();
		expect(levelCodeOfTest('vancomycin')).toBeNull();
		expect(levelCodeOfTest('2160-0')).toBeNull();
	});
});
