import { expect } from 'vitest';

/** Relative closeness: |actual − expected| ≤ tol × |expected| (default 0.5 %, clinical-reference §6). */
export function expectClose(actual: number, expected: number, tol = 0.005): void {
	expect(Number.isFinite(actual), `expected a finite number, got ${actual}`).toBe(true);
	const rel = Math.abs(actual - expected) / Math.abs(expected);
	expect(rel, `${actual} vs ${expected} (relative error ${rel})`).toBeLessThanOrEqual(tol);
}
