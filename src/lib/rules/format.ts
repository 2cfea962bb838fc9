// The one way rules format a value with its unit (conventions.md §12), used by finding texts, the
// admin pages and the back-test report. A narrow no-break space separates a number from its unit.

const NBSP = '\u202f';

/** Rounded for reading: ≥ 100 → whole numbers, ≥ 10 → one decimal, otherwise two significant decimals. */
export function formatNumber(value: number): string {
	if (!Number.isFinite(value)) return 'not available';
	const abs = Math.abs(value);
	const digits = abs >= 100 ? 0 : abs >= 10 ? 1 : 2;
	const fixed = value.toFixed(digits);
	// 12.0 → 12, 0.50 → 0.5: trailing zeros say nothing here
	return digits === 0 ? fixed : fixed.replace(/\.?0+$/, '');
}

/**
 * A value with its unit, e.g. 52 mL/min, 1.6×, 95 %, stage 2. `fraction` values (0..1) read as a
 * percentage; null reads "not available".
 */
export function formatValue(value: unknown, unit: string): string {
	if (value === null || value === undefined) return 'not available';
	if (typeof value === 'boolean') return value ? 'yes' : 'no';
	if (typeof value === 'string') return value;
	if (typeof value !== 'number') return String(value);
	switch (unit) {
		case '':
		case '1':
			return formatNumber(value);
		case 'fraction':
			return `${formatNumber(value * 100)}${NBSP}%`;
		case '×':
			return `${formatNumber(value)}×`;
		case '{stage}':
			return `stage ${formatNumber(value)}`;
		default:
			return `${formatNumber(value)}${NBSP}${unit}`;
	}
}
