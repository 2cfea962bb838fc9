// Helpers for the measured-level tests: a seeded random source and a simulator of the one-compartment
// infusion model written independently of src/lib/clinical/dosing-history.ts. It steps the exact solution
// of dC/dt = R(t)/V − k·C from event to event (infusion starts and ends, sample times) instead of
// superposing single doses, so an error in either formulation shows up as a disagreement.
import type { AgentParams } from '../../../src/lib/clinical';
import { mulberry32 } from '../../../src/lib/domain/random';
import agentsFile from '../../../fixtures/agents.json';

export const HOUR = 3_600_000;
export const T0 = Date.parse('2026-02-02T08:00:00Z');
export const atH = (h: number) => new Date(T0 + h * HOUR);

export function libraryAgent(name: string): AgentParams {
	const a = (agentsFile.agents as unknown as AgentParams[]).find((x) => x.name === name);
	if (!a) throw new Error(`no agent ${name} in fixtures/agents.json`);
	return a;
}

/** Deterministic uniform numbers in [0, 1). */
export const seeded = mulberry32;

/** Standard normal deviate (Box–Muller). */
export function normal(random: () => number): number {
	const u = Math.max(random(), 1e-12);
	return Math.sqrt(-2 * Math.log(u)) * Math.cos(2 * Math.PI * random());
}

export type SimDose = { startH: number; durationH: number; doseMg: number };

/** Concentrations at `timesH` (any order) by exact stepping between events; boluses when durationH = 0. */
export function simulate(doses: SimDose[], clearanceLPerH: number, volumeL: number, timesH: number[]): number[] {
	const k = clearanceLPerH / volumeL;
	const events = new Set<number>(timesH);
	for (const d of doses) {
		events.add(d.startH);
		events.add(d.startH + d.durationH);
	}
	const sorted = [...events].sort((a, b) => a - b);
	const at = new Map<number, number>();
	let c = 0;
	let t = sorted[0];
	for (const next of sorted) {
		const h = next - t;
		if (h > 0) {
			// infusion rate over (t, next): the events split the time line so it is constant inside
			let rate = 0;
			for (const d of doses) if (d.durationH > 0 && d.startH <= t && t < d.startH + d.durationH) rate += d.doseMg / d.durationH;
			const decay = Math.exp(-k * h);
			c = c * decay + (rate / (k * volumeL)) * (1 - decay);
		}
		t = next;
		for (const d of doses) if (d.durationH === 0 && d.startH === next) c += d.doseMg / volumeL;
		if (!at.has(next)) at.set(next, c);
	}
	return timesH.map((x) => at.get(x) as number);
}
