// How the board and the flag pages print ages, regimens, trace values and weight bases. Numbers go
// through the one number formatter (recommendations/format.ts). Pure: relative imports only.
import { formatNumber, withUnit } from '../recommendations/format';
import type { Severity } from './board';

export { formatNumber, withUnit };

export const SEVERITY_MARK: Record<Severity, { shape: string; word: string }> = {
	high: { shape: '◆', word: 'High' },
	moderate: { shape: '◈', word: 'Moderate' },
	low: { shape: '◇', word: 'Low' }
};

export const WEIGHT_BASIS_LABELS: Record<string, string> = { actual: 'actual weight', ideal: 'IBW', adjusted: 'AdjBW' };
/** For dense rows: total (actual) body weight, ideal, adjusted. */
export const WEIGHT_BASIS_SHORT: Record<string, string> = { actual: 'TBW', ideal: 'IBW', adjusted: 'AdjBW' };

/** Decimals that keep about three significant figures: 1250, 59.0, 2.10, 0.113. */
export function decimalsFor(value: number): number {
	const a = Math.abs(value);
	if (a >= 100) return 0;
	if (a >= 10) return 1;
	if (a >= 1) return 2;
	return 3;
}

/** The trace stores UCUM codes; people read these. */
const UNIT_DISPLAY: Record<string, string> = {
	a: 'y',
	'1': '',
	m2: 'm²',
	'mL/min/{1.73_m2}': 'mL/min/1.73 m²',
	'mg.h/L': 'mg·h/L',
	'mg/d': 'mg/day',
	'mg/dL/d': 'mg/dL per day',
	'/h': 'h⁻¹'
};

export function displayUnit(unit: string): string {
	if (unit in UNIT_DISPLAY) return UNIT_DISPLAY[unit];
	// UCUM annotations ({stage}) name the quantity, not a unit
	return unit.replace(/\{[^}]*\}/g, '').trim();
}

export function formatValue(value: number | string | boolean | null, rawUnit: string): string {
	const unit = displayUnit(rawUnit);
	if (value === null) return '—';
	if (typeof value === 'boolean') return value ? 'yes' : 'no';
	if (typeof value === 'string') return unit ? `${value} ${unit}` : value;
	return unit ? withUnit(value, unit, decimalsFor(value)) : formatNumber(value, decimalsFor(value));
}

/** "then → now unit", or whichever is known. */
export function formatChange(then: number | null, now: number | null, unit: string, decimals = 0): string {
	if (then !== null && now !== null) return `${formatNumber(then, decimals)} → ${withUnit(now, unit, decimals)}`;
	return withUnit(now ?? then, unit, decimals);
}

/** Short regimen for a dense row: "1250 mg q12h · 1.5 h". */
export function shortRegimen(r: { doseMg: number; intervalH: number; infusionH: number }): string {
	const infusion = r.infusionH > 0 ? ` · ${withUnit(r.infusionH, 'h', 2)} inf.` : '';
	return `${withUnit(r.doseMg, 'mg', 1)} q${formatNumber(r.intervalH, 1)}h${infusion}`;
}

/** How long ago, compactly: "12 min", "5 h", "3 d". */
export function formatAge(fromIso: string, now = Date.now()): string {
	const minutes = Math.max(0, (now - new Date(fromIso).getTime()) / 60_000);
	if (minutes < 60) return `${Math.floor(minutes)} min`;
	if (minutes < 48 * 60) return `${Math.floor(minutes / 60)} h`;
	return `${Math.floor(minutes / 1440)} d`;
}

/** "Mon 14 Jul, 08:05" in the hospital's locale. */
export function formatDateTime(iso: string | null): string {
	if (!iso) return '—';
	return new Date(iso).toLocaleString('en-GB', { weekday: 'short', day: 'numeric', month: 'short', hour: '2-digit', minute: '2-digit' });
}

export const EVENT_LABELS: Record<string, string> = {
	opened: 'Opened',
	finding_joined: 'Finding joined',
	finding_resolved: 'Finding resolved',
	merged: 'Merged with the order’s other flags',
	refreshed: 'Refreshed by a new assessment',
	claimed: 'Claimed',
	released: 'Released',
	review_started: 'Review started',
	snoozed: 'Snoozed',
	woke: 'Woken',
	note: 'Note',
	recommended: 'Recommendation sent',
	recommendation_withdrawn: 'Recommendation withdrawn',
	closed: 'Closed'
};
