// A small derivative-free minimiser for the level fits: Nelder–Mead simplex with restarts
// (Nelder JA, Mead R, Comput J 1965;7:308–313; standard coefficients 1, 2, ½, ½), and a
// finite-difference Hessian for the posterior spread. Pure; no allocation inside the inner loop
// beyond the simplex itself.

export type MinimiseResult = { x: number[]; f: number; evaluations: number };

type Options = { step: number[]; maxIterations?: number; fTolerance?: number; xTolerance?: number };

/** One Nelder–Mead run from x0 with an initial simplex of `step` along each axis. */
export function nelderMead(f: (x: number[]) => number, x0: number[], opts: Options): MinimiseResult {
	const n = x0.length;
	const maxIterations = opts.maxIterations ?? 400 * n;
	const fTol = opts.fTolerance ?? 1e-12;
	const xTol = opts.xTolerance ?? 1e-9;
	let evaluations = 0;
	const evalAt = (x: number[]) => {
		evaluations++;
		const v = f(x);
		return Number.isFinite(v) ? v : Infinity;
	};
	const pts: number[][] = [x0.slice()];
	for (let i = 0; i < n; i++) {
		const p = x0.slice();
		p[i] += opts.step[i];
		pts.push(p);
	}
	const vals = pts.map(evalAt);
	const order = () => {
		const idx = pts.map((_, i) => i).sort((a, b) => vals[a] - vals[b]);
		const p2 = idx.map((i) => pts[i]);
		const v2 = idx.map((i) => vals[i]);
		for (let i = 0; i <= n; i++) {
			pts[i] = p2[i];
			vals[i] = v2[i];
		}
	};
	const combine = (a: number[], b: number[], t: number) => a.map((ai, i) => ai + t * (b[i] - ai));
	for (let it = 0; it < maxIterations; it++) {
		order();
		let diameter = 0;
		for (let i = 1; i <= n; i++) for (let d = 0; d < n; d++) diameter = Math.max(diameter, Math.abs(pts[i][d] - pts[0][d]));
		if (Math.abs(vals[n] - vals[0]) <= fTol * (1 + Math.abs(vals[0])) && diameter <= xTol) break;
		const centroid = new Array<number>(n).fill(0);
		for (let i = 0; i < n; i++) for (let d = 0; d < n; d++) centroid[d] += pts[i][d] / n;
		const worst = pts[n];
		const reflected = combine(centroid, worst, -1);
		const fr = evalAt(reflected);
		if (fr < vals[0]) {
			const expanded = combine(centroid, worst, -2);
			const fe = evalAt(expanded);
			if (fe < fr) {
				pts[n] = expanded;
				vals[n] = fe;
			} else {
				pts[n] = reflected;
				vals[n] = fr;
			}
			continue;
		}
		if (fr < vals[n - 1]) {
			pts[n] = reflected;
			vals[n] = fr;
			continue;
		}
		// contraction: outside when the reflection beat the worst point, inside otherwise
		const outside = fr < vals[n];
		const contracted = outside ? combine(centroid, worst, -0.5) : combine(centroid, worst, 0.5);
		const fc = evalAt(contracted);
		if (fc < (outside ? fr : vals[n])) {
			pts[n] = contracted;
			vals[n] = fc;
			continue;
		}
		// shrink towards the best point
		for (let i = 1; i <= n; i++) {
			pts[i] = combine(pts[0], pts[i], 0.5);
			vals[i] = evalAt(pts[i]);
		}
	}
	order();
	return { x: pts[0], f: vals[0], evaluations };
}

/**
 * Minimum over several starts, each run restarted from its own best point with a fresh simplex until a
 * restart no longer improves (a collapsed simplex is Nelder–Mead's known failure; restarting cures it).
 */
export function minimiseWithRestarts(f: (x: number[]) => number, starts: number[][], step: number[], maxRestarts = 4): MinimiseResult {
	let best: MinimiseResult | null = null;
	let evaluations = 0;
	for (const s of starts) {
		let run = nelderMead(f, s, { step });
		evaluations += run.evaluations;
		for (let r = 0; r < maxRestarts; r++) {
			const again = nelderMead(f, run.x, { step: step.map((v) => v / 4) });
			evaluations += again.evaluations;
			const improved = again.f < run.f - 1e-12 * (1 + Math.abs(run.f));
			if (again.f <= run.f) run = again;
			if (!improved) break;
		}
		if (best === null || run.f < best.f) best = run;
	}
	const result = best as MinimiseResult;
	return { x: result.x, f: result.f, evaluations };
}

/** Hessian of f at x by central differences with step h (2-D and up; used at a minimum). */
export function hessian(f: (x: number[]) => number, x: number[], h = 1e-4): number[][] {
	const n = x.length;
	const at = (di: number, dj: number, si: number, sj: number) => {
		const p = x.slice();
		p[di] += si * h;
		p[dj] += sj * h;
		return f(p);
	};
	const f0 = f(x);
	const H: number[][] = Array.from({ length: n }, () => new Array<number>(n).fill(0));
	for (let i = 0; i < n; i++) {
		const p = x.slice();
		p[i] += h;
		const m = x.slice();
		m[i] -= h;
		H[i][i] = (f(p) - 2 * f0 + f(m)) / (h * h);
		for (let j = i + 1; j < n; j++) {
			H[i][j] = H[j][i] = (at(i, j, 1, 1) - at(i, j, 1, -1) - at(i, j, -1, 1) + at(i, j, -1, -1)) / (4 * h * h);
		}
	}
	return H;
}
