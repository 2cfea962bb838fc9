// An assessment's inputs in a compact, JSON-safe form, so that the calculation can be stored once as
// its inputs and re-run (with its full trace) whenever someone asks how a number was reached.
// assess() is a pure function of these inputs: the same inputs give the same result and trace.
import type { LevelTiming } from './levels-types';
import type { AgentParams, AssessInput, AssessSettings, Creatinine, OrderInput, RenalReplacementMode, Sex } from './types';

/**
 * Times are epoch milliseconds; series are [time, value] tuples to keep long histories small. Fields
 * added later (renal replacement, first dose, restart) are optional, so rows stored before them revive
 * unchanged.
 */
export type StoredAssessInput = {
	v: 1;
	atMs: number;
	patient: {
		birthMs?: number;
		ageYears?: number;
		sex: Sex;
		heightsCm: [number, number][];
		weightsKg: [number, number][];
		/** [mode, fromMs, toMs | null] */
		renalReplacement?: [RenalReplacementMode, number, number | null][];
	};
	creatinine: [number, number, Creatinine['unit']][];
	albuminGL: [number, number][];
	agent: AgentParams;
	order: Omit<OrderInput, 'startAt' | 'firstDoseAt' | 'restartAt'> & { startAtMs: number; firstDoseAtMs?: number; restartAtMs?: number };
	settings?: AssessSettings;
	/** doses actually given: [startMs, endMs | null, doseMg] (agents dosed from levels only) */
	administrations?: [number, number | null, number][];
	/** measured levels: [atMs, mgL, timing] */
	levels?: [number, number, LevelTiming][];
	/** the schedule when it is not the order's own: [startMs, intervalH, doseMg, infusionH, stopMs | null] */
	schedule?: [number, number, number, number, number | null];
};

export function storeAssessInput(input: AssessInput): StoredAssessInput {
	const { startAt, firstDoseAt, restartAt, ...order } = input.order;
	const stored: StoredAssessInput = {
		v: 1,
		atMs: input.at.getTime(),
		patient: {
			sex: input.patient.sex,
			heightsCm: input.patient.heights.map((h) => [h.at.getTime(), h.cm]),
			weightsKg: input.patient.weights.map((w) => [w.at.getTime(), w.kg])
		},
		creatinine: input.creatinine.map((c) => [c.at.getTime(), c.creatinine.value, c.creatinine.unit]),
		albuminGL: input.albumin.map((a) => [a.at.getTime(), a.gL]),
		agent: input.agent,
		order: { ...order, startAtMs: startAt.getTime() }
	};
	if (firstDoseAt) stored.order.firstDoseAtMs = firstDoseAt.getTime();
	if (restartAt) stored.order.restartAtMs = restartAt.getTime();
	if (input.patient.renalReplacement && input.patient.renalReplacement.length > 0) {
		stored.patient.renalReplacement = input.patient.renalReplacement.map((e) => [e.mode, e.from.getTime(), e.to === null ? null : e.to.getTime()]);
	}
	if (input.patient.birthDate) stored.patient.birthMs = input.patient.birthDate.getTime();
	if (input.patient.ageYears !== undefined) stored.patient.ageYears = input.patient.ageYears;
	if (input.settings) stored.settings = input.settings;
	if (input.administrations)
		stored.administrations = input.administrations.map((a) => [a.startAt.getTime(), a.endAt === null ? null : a.endAt.getTime(), a.doseMg]);
	if (input.levels) stored.levels = input.levels.map((l) => [l.at.getTime(), l.mgL, l.timing]);
	if (input.schedule) {
		const s = input.schedule;
		stored.schedule = [s.startAt.getTime(), s.intervalH, s.doseMg, s.infusionH, s.stopAt == null ? null : s.stopAt.getTime()];
	}
	return stored;
}

export function reviveAssessInput(stored: StoredAssessInput): AssessInput {
	if (stored?.v !== 1) throw new Error(`stored assessment input of unknown version ${String(stored?.v)}`);
	const { startAtMs, firstDoseAtMs, restartAtMs, ...order } = stored.order;
	return {
		at: new Date(stored.atMs),
		patient: {
			...(stored.patient.birthMs !== undefined ? { birthDate: new Date(stored.patient.birthMs) } : {}),
			...(stored.patient.ageYears !== undefined ? { ageYears: stored.patient.ageYears } : {}),
			sex: stored.patient.sex,
			heights: stored.patient.heightsCm.map(([ms, cm]) => ({ at: new Date(ms), cm })),
			weights: stored.patient.weightsKg.map(([ms, kg]) => ({ at: new Date(ms), kg })),
			...(stored.patient.renalReplacement
				? {
						renalReplacement: stored.patient.renalReplacement.map(([mode, fromMs, toMs]) => ({
							mode,
							from: new Date(fromMs),
							to: toMs === null ? null : new Date(toMs)
						}))
					}
				: {})
		},
		creatinine: stored.creatinine.map(([ms, value, unit]) => ({ at: new Date(ms), creatinine: { value, unit } })),
		albumin: stored.albuminGL.map(([ms, gL]) => ({ at: new Date(ms), gL })),
		agent: stored.agent,
		order: {
			...order,
			startAt: new Date(startAtMs),
			...(firstDoseAtMs !== undefined ? { firstDoseAt: new Date(firstDoseAtMs) } : {}),
			...(restartAtMs !== undefined ? { restartAt: new Date(restartAtMs) } : {})
		},
		...(stored.settings ? { settings: stored.settings } : {}),
		...(stored.administrations
			? {
					administrations: stored.administrations.map(([startMs, endMs, doseMg]) => ({
						startAt: new Date(startMs),
						endAt: endMs === null ? null : new Date(endMs),
						doseMg
					}))
				}
			: {}),
		...(stored.levels ? { levels: stored.levels.map(([ms, mgL, timing]) => ({ at: new Date(ms), mgL, timing })) } : {}),
		...(stored.schedule
			? {
					schedule: {
						startAt: new Date(stored.schedule[0]),
						intervalH: stored.schedule[1],
						doseMg: stored.schedule[2],
						infusionH: stored.schedule[3],
						stopAt: stored.schedule[4] === null ? null : new Date(stored.schedule[4])
					}
				}
			: {})
	};
}
