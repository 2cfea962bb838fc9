// Dosing history: administrations with the schedule standing in where they are missing, and the
// concentration of irregular doses by superposition, checked against the odex ODE solver
// (Gragg–Bulirsch–Stoer; Hairer & Wanner's ODEX) and against exact event stepping (levels-helpers.ts).
import fc from 'fast-check';
import { createRequire } from 'node:module';
import { describe, expect, it } from 'vitest';
import {
	aucBetween,
	buildDosingHistory,
	ClinicalInputError,
	concentrationAtMs,
	concentrationAtRaw,
	infusionRunningAt,
	type Administration
} from '../../../src/lib/clinical';
import { expectClose } from './helpers';
import { atH, HOUR, simulate, T0 } from './levels-helpers';

type OdexSolver = {
	absoluteTolerance: number;
	relativeTolerance: number;
	solve(f: (x: number, y: number[]) => number[], x0: number, y0: number[], xEnd: number): { y: number[] };
};
const { Solver } = createRequire(import.meta.url)('odex') as { Solver: new (n: number) => OdexSolver };

/**
 * Integrate dC/dt = R(t)/V − k·C and dAUC/dt = C piecewise between infusion starts/stops (the input is
 * discontinuous there); boluses jump C by dose / V. Returns [C, AUC from 0] at the sample times (ascending).
 */
function integrate(doses: { startH: number; durationH: number; doseMg: number }[], kPerH: number, volumeL: number, samplesH: number[]): [number, number][] {
	const solver = new Solver(2);
	solver.absoluteTolerance = 1e-12;
	solver.relativeTolerance = 1e-12;
	const cuts = [...new Set([0, ...doses.flatMap((d) => [d.startH, d.startH + d.durationH]), ...samplesH])].sort((a, b) => a - b);
	const out = new Map<number, [number, number]>();
	let y = [0, 0];
	let t = cuts[0];
	for (const next of cuts) {
		if (next > t) {
			const mid = (t + next) / 2;
			let rate = 0;
			for (const d of doses) if (d.durationH > 0 && d.startH <= mid && mid < d.startH + d.durationH) rate += d.doseMg / d.durationH;
			y = solver.solve((_x, s) => [rate / volumeL - kPerH * s[0], s[0]], t, y, next).y;
			t = next;
		}
		for (const d of doses) if (d.durationH === 0 && d.startH === next) y = [y[0] + d.doseMg / volumeL, y[1]];
		out.set(next, [y[0], y[1]]);
	}
	return samplesH.map((s) => out.get(s) as [number, number]);
}

// irregular: late and early doses, a missed slot, a double dose, different infusion times and a bolus
const IRREGULAR = [
	{ startH: 0, durationH: 1, doseMg: 1500 },
	{ startH: 13.25, durationH: 1.5, doseMg: 1000 },
	{ startH: 23, durationH: 2, doseMg: 1250 },
	{ startH: 47.5, durationH: 0.5, doseMg: 750 },
	{ startH: 49, durationH: 0, doseMg: 500 },
	{ startH: 60.1, durationH: 2.5, doseMg: 2000 }
];
const toAdministrations = (doses: typeof IRREGULAR): Administration[] =>
	doses.map((d, i) => ({ id: `a${i}`, startAt: atH(d.startH), endAt: d.durationH > 0 ? atH(d.startH + d.durationH) : null, doseMg: d.doseMg }));

describe('superposition of irregular administrations', () => {
	const cases = [
		{ kPerH: 0.0756, volumeL: 68.6 }, // vancomycin-like
		{ kPerH: 0.3, volumeL: 17.5 }, // aminoglycoside-like (clinical-reference A17 kinetics)
		{ kPerH: 0.01, volumeL: 40 } // slow elimination: accumulation across doses dominates
	];
	it.each(cases)('agrees with the ODE solver every quarter hour over three days: %o', ({ kPerH, volumeL }) => {
		const history = buildDosingHistory({ at: atH(80), administrations: toAdministrations(IRREGULAR), schedule: null });
		expect(history.doses).toHaveLength(IRREGULAR.length);
		const samples = Array.from({ length: 320 }, (_, i) => 0.25 * (i + 1));
		const numeric = integrate(IRREGULAR, kPerH, volumeL, samples);
		samples.forEach((s, i) => expectClose(concentrationAtMs(history.doses, kPerH, volumeL, T0 + s * HOUR), numeric[i][0], 1e-6));
		// and with exact event stepping, an independent formulation
		const stepped = simulate(IRREGULAR, kPerH * volumeL, volumeL, samples);
		samples.forEach((s, i) => expectClose(concentrationAtMs(history.doses, kPerH, volumeL, T0 + s * HOUR), stepped[i], 1e-9));
	});

	it.each(cases)('AUC between two times by mass balance agrees with the integrated AUC: %o', ({ kPerH, volumeL }) => {
		const history = buildDosingHistory({ at: atH(80), administrations: toAdministrations(IRREGULAR), schedule: null });
		const [a, b] = integrate(IRREGULAR, kPerH, volumeL, [13.5, 61]);
		expectClose(aucBetween(history.doses, kPerH * volumeL, volumeL, T0 + 13.5 * HOUR, T0 + 61 * HOUR), b[1] - a[1], 1e-6);
	});

	it('a regular schedule gives the same curve as the existing regimen superposition', () => {
		const history = buildDosingHistory({ at: atH(100), administrations: [], schedule: { startAt: atH(0), intervalH: 8, doseMg: 120, infusionH: 0.5 } });
		for (const h of [0.3, 0.5, 7.9, 8.25, 50, 99.5]) {
			expectClose(concentrationAtMs(history.doses, 0.3, 17.5, T0 + h * HOUR), concentrationAtRaw(120, 8, 0.5, 0.3, 17.5, h), 1e-12);
		}
	});
});

describe('dosing history: administrations first, the schedule where they are missing', () => {
	const schedule = { startAt: atH(0), intervalH: 12, doseMg: 1000, infusionH: 1 };

	it('uses recorded administrations, keeps their real times and amounts, and says nothing is assumed', () => {
		const given = [0, 12.5, 23.75, 36].map((h, i) => ({ startAt: atH(h), endAt: atH(h + 1.5), doseMg: 1000 + 250 * i }));
		const h = buildDosingHistory({ at: atH(40), administrations: given, schedule });
		expect(h.givenCount).toBe(4);
		expect(h.assumedCount).toBe(0);
		expect(h.doses.map((d) => [d.startMs, d.durationH, d.doseMg])).toEqual(given.map((g) => [g.startAt.getTime(), 1.5, g.doseMg]));
		expect(h.notes).toEqual([]);
		expect(h.trace[0].note).toBeUndefined();
	});

	it('fills a missing slot from the schedule with a trace note saying so', () => {
		const given = [0, 24].map((hh) => ({ startAt: atH(hh), endAt: atH(hh + 1), doseMg: 1000 }));
		const h = buildDosingHistory({ at: atH(40), administrations: given, schedule });
		expect(h.assumedCount).toBe(2); // 12 h and 36 h
		expect(h.doses.filter((d) => d.source === 'scheduled').map((d) => (d.startMs - T0) / HOUR)).toEqual([12, 36]);
		expect(h.trace[0].note).toMatch(/2 scheduled doses with no recorded administration assumed given as ordered/);
	});

	it('with no administrations every scheduled dose up to the assessment time is assumed, and the note says all', () => {
		const h = buildDosingHistory({ at: atH(30), administrations: [], schedule });
		expect(h.doses.map((d) => (d.startMs - T0) / HOUR)).toEqual([0, 12, 24]);
		expect(h.trace[0].note).toMatch(/no administrations recorded: all 3 doses assumed given as ordered/);
	});

	it('an administration up to half an interval off schedule stands for its slot; a stopped order schedules nothing after the stop', () => {
		const given = [{ startAt: atH(17.9), endAt: atH(19), doseMg: 1000 }];
		const h = buildDosingHistory({ at: atH(60), administrations: given, schedule: { ...schedule, stopAt: atH(30) } });
		// slots 0, 12, 24: the 17.9-h dose is nearest to 12 (5.9 h < 6 h); 0 and 24 are assumed
		expect(h.doses.map((d) => [(d.startMs - T0) / HOUR, d.source])).toEqual([
			[0, 'scheduled'],
			[17.9, 'given'],
			[24, 'scheduled']
		]);
	});

	it('a dose recorded as not given adds no drug and is not assumed from the schedule (common practice: a held dose is not given)', () => {
		const given = [0, 12].map((hh) => ({ startAt: atH(hh), endAt: atH(hh + 1), doseMg: 1000 }));
		const held = [24.2, 36].map((hh) => ({ startAt: atH(hh), endAt: null, doseMg: 1000, notGiven: true }));
		const h = buildDosingHistory({ at: atH(50), administrations: [...given, ...held], schedule });
		// slots 0, 12 given; 24 and 36 held; 48 neither recorded nor held: assumed
		expect(h.doses.map((d) => [(d.startMs - T0) / HOUR, d.source])).toEqual([
			[0, 'given'],
			[12, 'given'],
			[48, 'scheduled']
		]);
		expect([h.givenCount, h.notGivenCount, h.assumedCount]).toEqual([2, 2, 1]);
		expect(h.notes).toEqual([
			'1 scheduled dose with no recorded administration assumed given as ordered',
			'2 doses recorded as not given (held or refused), counted as no drug'
		]);
		expect(h.trace[0].inputs.find((i) => i.name === 'doses recorded as not given')?.value).toBe(2);
		// with only held doses on record the note does not claim that nothing was recorded
		const onlyHeld = buildDosingHistory({ at: atH(30), administrations: [{ startAt: atH(0), endAt: null, doseMg: 1000, notGiven: true }], schedule });
		expect(onlyHeld.doses.map((d) => (d.startMs - T0) / HOUR)).toEqual([12, 24]);
		expect(onlyHeld.notes[0]).toBe('2 scheduled doses with no recorded administration assumed given as ordered');
	});

	it('invariant: a dose recorded as not given never adds drug; each slot holds at most one dose (common practice)', () => {
		// each of twelve 12-hourly slots: given (a little early or late), recorded not given, or nothing on record
		const slotKind = fc.constantFrom('given', 'not-given', 'none');
		fc.assert(
			fc.property(fc.array(fc.tuple(slotKind, fc.integer({ min: -300, max: 300 })), { minLength: 12, maxLength: 12 }), (slots) => {
				const records: Administration[] = slots.flatMap(([kind, offsetMin], k) => {
					const startAt = new Date(atH(12 * k).getTime() + offsetMin * 60_000);
					if (kind === 'none') return [];
					return [{ startAt, endAt: null, doseMg: 1000, ...(kind === 'not-given' ? { notGiven: true } : {}) }];
				});
				const h = buildDosingHistory({ at: atH(12 * 11 + 6), administrations: records, schedule });
				const count = (kind: string) => slots.filter(([k]) => k === kind).length;
				expect(h.doses).toHaveLength(count('given') + count('none'));
				expect([h.givenCount, h.notGivenCount, h.assumedCount]).toEqual([count('given'), count('not-given'), count('none')]);
				// the drug in the history: the doses given plus one scheduled dose per slot with nothing on record
				expect(h.doses.reduce((sum, d) => sum + d.doseMg, 0)).toBe(1000 * (count('given') + count('none')));
			}),
			{ numRuns: 300 }
		);
	});

	it('leaves out administrations after the assessment time, with a note', () => {
		const h = buildDosingHistory({
			at: atH(5),
			administrations: [
				{ startAt: atH(0), endAt: atH(1), doseMg: 500 },
				{ startAt: atH(12), endAt: atH(13), doseMg: 500 }
			],
			schedule: null
		});
		expect(h.doses).toHaveLength(1);
		expect(h.notes[0]).toMatch(/1 administration recorded after the assessment time left out/);
	});

	it('rejects impossible administrations by name', () => {
		expect(() => buildDosingHistory({ at: atH(5), administrations: [{ startAt: atH(2), endAt: atH(1), doseMg: 500 }], schedule: null })).toThrow(
			ClinicalInputError
		);
		expect(() => buildDosingHistory({ at: atH(5), administrations: [{ startAt: atH(0), endAt: null, doseMg: 0 }], schedule: null })).toThrow(
			/administrations\[0\]\.doseMg/
		);
	});

	it('an infusion runs strictly between its start and end (a sample at the start minute is pre-dose)', () => {
		const h = buildDosingHistory({ at: atH(10), administrations: [{ startAt: atH(1), endAt: atH(2), doseMg: 500 }], schedule: null });
		expect(infusionRunningAt(h.doses, T0 + 1 * HOUR)).toBeNull();
		expect(infusionRunningAt(h.doses, T0 + 1.5 * HOUR)).not.toBeNull();
		expect(infusionRunningAt(h.doses, T0 + 2 * HOUR)).toBeNull();
	});
});
