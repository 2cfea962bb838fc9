// Deterministic randomness for the demo hospital, the simulator, the benchmarks and the tests: the same
// seed gives the same sequence on every machine. Not for secrets (use node:crypto). Pure.

export type Rng = () => number;

/** mulberry32: a small, fast 32-bit PRNG giving uniform numbers in [0, 1). */
export function mulberry32(seed: number): Rng {
	let a = seed >>> 0;
	return () => {
		a = (a + 0x6d2b79f5) >>> 0;
		let t = a;
		t = Math.imul(t ^ (t >>> 15), t | 1);
		t ^= t + Math.imul(t ^ (t >>> 7), t | 61);
		return ((t ^ (t >>> 14)) >>> 0) / 4294967296;
	};
}

/** FNV-1a 32-bit hash of a string, to seed a PRNG from an id. */
export function hashString(text: string): number {
	let h = 0x811c9dc5;
	for (let i = 0; i < text.length; i++) {
		h ^= text.charCodeAt(i);
		h = Math.imul(h, 0x01000193);
	}
	return h >>> 0;
}

/** A uniform number in [lo, hi). */
export const between = (rng: Rng, lo: number, hi: number) => lo + (hi - lo) * rng();
