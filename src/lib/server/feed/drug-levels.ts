// Measured drug levels from the feed: the LOINC codes read as serum or plasma vancomycin, gentamicin,
// tobramycin and amikacin concentrations (trough, peak, unspecified timing), and their units, stored
// in mg/L (1 µg/mL = 1 mg/L).
import type { LevelTiming } from '../../clinical/levels-types';

export type LevelCode = { agentCode: string; agent: string; timing: LevelTiming; name: string };

/**
 * The drug-level LOINC codes Ebbline reads (LOINC, Regenstrief Institute), keyed by code; `agentCode`
 * is the agent's ATC code in the library. The README lists them with how each was checked.
 */
export const LEVEL_CODES: Record<string, LevelCode> = {
	'4092-3': { agentCode: 'J01XA01', agent: 'vancomycin', timing: 'trough', name: 'Vancomycin [Mass/volume] in Serum or Plasma --trough' },
	'4090-7': { agentCode: 'J01XA01', agent: 'vancomycin', timing: 'peak', name: 'Vancomycin [Mass/volume] in Serum or Plasma --peak' },
	'20578-1': { agentCode: 'J01XA01', agent: 'vancomycin', timing: 'random', name: 'Vancomycin [Mass/volume] in Serum or Plasma --random' },
	'3665-7': { agentCode: 'J01GB03', agent: 'gentamicin', timing: 'trough', name: 'Gentamicin [Mass/volume] in Serum or Plasma --trough' },
	'3663-2': { agentCode: 'J01GB03', agent: 'gentamicin', timing: 'peak', name: 'Gentamicin [Mass/volume] in Serum or Plasma --peak' },
	'3664-0': { agentCode: 'J01GB03', agent: 'gentamicin', timing: 'random', name: 'Gentamicin [Mass/volume] in Serum or Plasma --random' },
	'35668-3': { agentCode: 'J01GB03', agent: 'gentamicin', timing: 'random', name: 'Gentamicin [Mass/volume] in Serum or Plasma' },
	'4059-2': { agentCode: 'J01GB01', agent: 'tobramycin', timing: 'trough', name: 'Tobramycin [Mass/volume] in Serum or Plasma --trough' },
	'4057-6': { agentCode: 'J01GB01', agent: 'tobramycin', timing: 'peak', name: 'Tobramycin [Mass/volume] in Serum or Plasma --peak' },
	'35670-9': { agentCode: 'J01GB01', agent: 'tobramycin', timing: 'random', name: 'Tobramycin [Mass/volume] in Serum or Plasma' },
	'3321-7': { agentCode: 'J01GB06', agent: 'amikacin', timing: 'trough', name: 'Amikacin [Mass/volume] in Serum or Plasma --trough' },
	'3319-1': { agentCode: 'J01GB06', agent: 'amikacin', timing: 'peak', name: 'Amikacin [Mass/volume] in Serum or Plasma --peak' },
	'35669-1': { agentCode: 'J01GB06', agent: 'amikacin', timing: 'random', name: 'Amikacin [Mass/volume] in Serum or Plasma' }
};

const firstCode = (match: (c: LevelCode) => boolean) => Object.entries(LEVEL_CODES).find(([, c]) => match(c))?.[0] ?? null;

/** The code a CSV row stands for when it names the drug and the timing ("vancomycin trough"). */
export const levelCodeFor = (agent: string, timing: LevelTiming): string | null => firstCode((c) => c.agent === agent && c.timing === timing);

/** The code of a level of the library agent with this ATC code, drawn at this timing. */
export const levelCodeOfAgent = (agentCode: string, timing: LevelTiming): string | null => firstCode((c) => c.agentCode === agentCode && c.timing === timing);

/** UCUM codes (and unambiguous printed spellings) of a mass concentration, to mg/L. */
const LEVEL_UNITS: Record<string, { ucum: string; toMgL: number }> = {
	'mg/l': { ucum: 'mg/L', toMgL: 1 },
	'ug/ml': { ucum: 'ug/mL', toMgL: 1 },
	'µg/ml': { ucum: 'ug/mL', toMgL: 1 },
	'μg/ml': { ucum: 'ug/mL', toMgL: 1 },
	'mcg/ml': { ucum: 'ug/mL', toMgL: 1 }
};
export const LEVEL_UNITS_ACCEPTED = ['mg/L', 'ug/mL'];

/**
 * The highest level accepted, mg/L: above any concentration reported after a therapeutic dose of these
 * agents (vancomycin intoxications are reported near 100–200 mg/L); higher is read as a unit error
 * (common practice).
 */
export const MAX_LEVEL_MG_L = 250;

export type NormalisedLevel = { ok: true; unit: string; valueMgL: number } | { ok: false; field: 'unit' | 'value'; reason: string };

/** A level's value and unit, checked and in mg/L. A level of 0 (below the assay's range) is kept. */
export function normaliseLevel(value: number, unit: string, code: LevelCode): NormalisedLevel {
	if (!Number.isFinite(value)) return { ok: false, field: 'value', reason: 'must be a number' };
	if (value < 0) return { ok: false, field: 'value', reason: `must not be negative (got ${value})` };
	const rule = LEVEL_UNITS[unit.trim().toLowerCase()];
	if (!rule) {
		return {
			ok: false,
			field: 'unit',
			reason: `unit '${unit}' is not a mass concentration Ebbline accepts for a ${code.agent} level; send mg/L or ug/mL (UCUM)`
		};
	}
	const valueMgL = value * rule.toMgL;
	if (valueMgL > MAX_LEVEL_MG_L) {
		return {
			ok: false,
			field: 'value',
			reason: `${value} ${unit} is above the plausible range for a ${code.agent} level (0–${MAX_LEVEL_MG_L} mg/L): check the value and its unit`
		};
	}
	return { ok: true, unit: rule.ucum, valueMgL: Number(valueMgL.toFixed(6)) };
}
