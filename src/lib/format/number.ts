// Numbers as people read them, with their units (conventions.md §12). Pure: pages, e-mails, CSV
// exports, the rules and the worker all import this.

const LOCALE = 'en-GB';
/** A narrow no-break space keeps a number and its unit on one line in rule texts. */
const NBSP = '\u202f';

/** Fixed decimals per quantity, thin grouping, never "NaN": an unknown value reads "—". */
export function formatNumber(value: number | null | undefined, decimals = 0): string {
	if (value === null || value === undefined || !Number.isFinite(value)) return '—';
	return value.toLocaleString(LOCALE, { minimumFractionDigits: 0, maximumFractionDigits: decimals });
}

export function withUnit(value: number | null | undefined, unit: string, decimals = 0): string {
	const text = formatNumber(value, decimals);
	return text === '—' ? text : `${text} ${unit}`;
}

/** "then → now unit" when both are known, otherwise whichever is. */
export function formatChange(then: number | null, now: number | null, unit: string, decimals = 0): string {
	if (then !== null && now !== null) return `${formatNumber(then, decimals)} → ${withUnit(now, unit, decimals)}`;
	return withUnit(now ?? then, unit, decimals);
}

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

/** A value of the assessment's trace with its UCUM unit shown for reading, about three significant figures. */
export function formatTraceValue(value: number | string | boolean | null, rawUnit: string): string {
	const unit = displayUnit(rawUnit);
	if (value === null) return '—';
	if (typeof value === 'boolean') return value ? 'yes' : 'no';
	if (typeof value === 'string') return unit ? `${value} ${unit}` : value;
	return unit ? withUnit(value, unit, decimalsFor(value)) : formatNumber(value, decimalsFor(value));
}

/**
 * The anchor id of each trace step: `trace-<key>` for a key's first step (what links point at), then
 * `trace-<key>-2`, `-3`… for steps that repeat it (one per fitted level); never an id used before.
 */
export function traceAnchorIds(steps: readonly { key: string }[]): string[] {
	const used = new Set<string>();
	return steps.map(({ key }) => {
		let id = `trace-${key}`;
		for (let n = 2; used.has(id); n++) id = `trace-${key}-${n}`;
		used.add(id);
		return id;
	});
}

/** Rounded for reading in rule texts: ≥ 100 → whole numbers, ≥ 10 → one decimal, otherwise two significant decimals. */
export function formatRounded(value: number): string {
	if (!Number.isFinite(value)) return 'not available';
	const abs = Math.abs(value);
	const digits = abs >= 100 ? 0 : abs >= 10 ? 1 : 2;
	const fixed = value.toFixed(digits);
	// 12.0 → 12, 0.50 → 0.5: trailing zeros say nothing here
	return digits === 0 ? fixed : fixed.replace(/\.?0+$/, '');
}

/**
 * A fact or threshold with its unit, as finding texts, the admin pages and the back-test report print it:
 * 52 mL/min, 1.6×, 95 %, stage 2. `fraction` values (0..1) read as a percentage; null reads "not available".
 */
export function formatFact(value: unknown, unit: string): string {
	if (value === null || value === undefined) return 'not available';
	if (typeof value === 'boolean') return value ? 'yes' : 'no';
	if (typeof value === 'string') return value;
	if (typeof value !== 'number') return String(value);
	switch (unit) {
		case '':
		case '1':
			return formatRounded(value);
		case 'fraction':
			return `${formatRounded(value * 100)}${NBSP}%`;
		case '×':
			return `${formatRounded(value)}×`;
		case '{stage}':
			return `stage ${formatRounded(value)}`;
		default:
			return `${formatRounded(value)}${NBSP}${unit}`;
	}
}
