// Dosing history: the doses actually given (medication administrations), with the order's schedule
// standing in where administrations are missing, and the concentration they predict at any time by
// superposition of one-compartment zero-order infusions with first-order elimination (k = CL / V).
// Superposition holds because the model is linear (clinical-reference F11, F12; textbook identities,
// e.g. Rowland M, Tozer TN, Clinical Pharmacokinetics and Pharmacodynamics).
import { ClinicalInputError, requireDate, requireNonNegative, requirePositive } from './errors';
import type { Administration, DosingHistory, DosingSchedule, HistoryDose } from './levels-types';
import { HOUR_MS } from './timeline';
import { input, SOURCES, step } from './trace';

/** An administration within this fraction of the interval of a scheduled time stands for that dose (common practice). */
export const SCHEDULE_MATCH_FRACTION = 0.5;
/** Scheduled doses generated at most (a guard against a tiny interval over a long course). */
export const MAX_SCHEDULED_DOSES = 2000;

export const SUPERPOSITION_FORMULA =
	'C(t) = Σᵢ Cᵢ(t − sᵢ); during infusion i: (Dᵢ/tᵢ)/(k·V)·(1 − e^(−k(t − sᵢ))); after it: (Dᵢ/tᵢ)/(k·V)·(1 − e^(−k·tᵢ))·e^(−k(t − sᵢ − tᵢ)); bolus: Dᵢ/V·e^(−k(t − sᵢ))';

function checkAdministration(a: Administration, i: number): HistoryDose {
	if (a == null || typeof a !== 'object') throw new ClinicalInputError(`administrations[${i}]`, a, 'must be an object');
	const startMs = requireDate(`administrations[${i}].startAt`, a.startAt);
	const doseMg = requirePositive(`administrations[${i}].doseMg`, a.doseMg);
	let durationH = 0;
	if (a.endAt != null) {
		const endMs = requireDate(`administrations[${i}].endAt`, a.endAt);
		if (endMs < startMs) throw new ClinicalInputError(`administrations[${i}].endAt`, a.endAt, 'must not be before startAt');
		durationH = (endMs - startMs) / HOUR_MS;
	}
	return { startMs, durationH, doseMg, source: 'given', administrationId: a.id };
}

/**
 * The doses up to `at`: every recorded administration, plus each scheduled dose (schedule start, every
 * interval, until the stop time or `at`) that has no administration within half an interval of its
 * time, assumed given as ordered. A record that a dose was not given (held, refused) adds no drug and
 * stands for its scheduled dose, so that dose is not assumed either. `fallback: false` uses recorded
 * administrations only.
 */
export function buildDosingHistory(args: {
	at: Date;
	administrations: readonly Administration[];
	schedule: DosingSchedule | null;
	fallback?: boolean;
}): DosingHistory {
	const atMs = requireDate('at', args.at);
	if (!Array.isArray(args.administrations)) throw new ClinicalInputError('administrations', args.administrations, 'must be an array');
	const notes: string[] = [];
	const given: HistoryDose[] = [];
	/** times of the doses recorded as not given */
	const notGivenMs: number[] = [];
	let future = 0;
	args.administrations.forEach((a, i) => {
		const d = checkAdministration(a, i);
		if (d.startMs > atMs) future++;
		else if (a.notGiven === true) notGivenMs.push(d.startMs);
		else given.push(d);
	});
	if (future > 0) notes.push(`${future} administration${future === 1 ? '' : 's'} recorded after the assessment time left out`);
	given.sort((a, b) => a.startMs - b.startMs);

	const assumed: HistoryDose[] = [];
	const schedule = args.schedule;
	if (schedule != null && args.fallback !== false) {
		const startMs = requireDate('schedule.startAt', schedule.startAt);
		const intervalH = requirePositive('schedule.intervalH', schedule.intervalH);
		const doseMg = requirePositive('schedule.doseMg', schedule.doseMg);
		const infusionH = requireNonNegative('schedule.infusionH', schedule.infusionH);
		if (infusionH > intervalH) throw new ClinicalInputError('schedule.infusionH', infusionH, 'must not exceed schedule.intervalH');
		const stopMs = schedule.stopAt == null ? Infinity : requireDate('schedule.stopAt', schedule.stopAt);
		const toleranceMs = SCHEDULE_MATCH_FRACTION * intervalH * HOUR_MS;
		// the nearest unclaimed record within half an interval stands for a scheduled dose
		const givenMs = given.map((d) => d.startMs);
		const givenClaimed = new Array<boolean>(givenMs.length).fill(false);
		const notGivenClaimed = new Array<boolean>(notGivenMs.length).fill(false);
		const claimNearest = (timesMs: number[], claimed: boolean[], slotMs: number): boolean => {
			let best = -1;
			for (let i = 0; i < timesMs.length; i++) {
				const gap = Math.abs(timesMs[i] - slotMs);
				if (!claimed[i] && gap < toleranceMs && (best < 0 || gap < Math.abs(timesMs[best] - slotMs))) best = i;
			}
			if (best >= 0) claimed[best] = true;
			return best >= 0;
		};
		let slotCount = 0;
		for (let slotMs = startMs; slotMs <= atMs && slotMs < stopMs; slotMs = startMs + ++slotCount * intervalH * HOUR_MS) {
			if (slotCount >= MAX_SCHEDULED_DOSES)
				throw new ClinicalInputError('schedule.intervalH', intervalH, `gives more than ${MAX_SCHEDULED_DOSES} scheduled doses before the assessment time`);
			// a dose given stands for the slot; else a record that it was not given; else it is assumed given as ordered
			if (claimNearest(givenMs, givenClaimed, slotMs) || claimNearest(notGivenMs, notGivenClaimed, slotMs)) continue;
			assumed.push({ startMs: slotMs, durationH: infusionH, doseMg, source: 'scheduled' });
		}
		if (assumed.length > 0) {
			notes.push(
				given.length === 0 && notGivenMs.length === 0
					? `no administrations recorded: all ${assumed.length} doses assumed given as ordered (${doseMg} mg every ${intervalH} h)`
					: `${assumed.length} scheduled dose${assumed.length === 1 ? '' : 's'} with no recorded administration assumed given as ordered`
			);
		}
	}
	if (notGivenMs.length > 0)
		notes.push(`${notGivenMs.length} dose${notGivenMs.length === 1 ? '' : 's'} recorded as not given (held or refused), counted as no drug`);
	const doses = [...given, ...assumed].sort((a, b) => a.startMs - b.startMs);
	const trace = [
		step(
			'dosingHistory',
			'Doses in the dosing history',
			doses.length,
			'doses',
			`recorded administrations; scheduled doses without an administration (given or recorded not given) within ${SCHEDULE_MATCH_FRACTION} × interval assumed given as ordered. ${SUPERPOSITION_FORMULA}`,
			[
				input('administrations recorded', given.length, 'doses', SOURCES.record),
				...(notGivenMs.length > 0 ? [input('doses recorded as not given', notGivenMs.length, 'doses', SOURCES.record)] : []),
				input('scheduled doses assumed', assumed.length, 'doses', schedule == null ? 'no schedule' : 'order schedule')
			],
			SOURCES.oneCompartment + ' (superposition of single infusions)',
			notes.length > 0 ? notes.join('; ') : undefined
		)
	];
	return { doses, givenCount: given.length, assumedCount: assumed.length, notGivenCount: notGivenMs.length, notes, trace };
}

/** Concentration of one dose `elapsedH` after its start, mg/L (zero-order infusion, first-order elimination). */
export function singleDoseConcentration(doseMg: number, durationH: number, elapsedH: number, kPerH: number, volumeL: number): number {
	if (elapsedH < 0) return 0;
	// an infusion shorter than ~4 µs is a bolus (avoids dose / tinf overflowing)
	if (durationH < 1e-9) return (doseMg / volumeL) * Math.exp(-kPerH * elapsedH);
	const rate = doseMg / durationH;
	if (elapsedH < durationH) return (rate / (kPerH * volumeL)) * -Math.expm1(-kPerH * elapsedH);
	return (rate / (kPerH * volumeL)) * -Math.expm1(-kPerH * durationH) * Math.exp(-kPerH * (elapsedH - durationH));
}

/** Concentration at tMs from every dose of the history, mg/L. */
export function concentrationAtMs(doses: readonly HistoryDose[], kPerH: number, volumeL: number, tMs: number): number {
	let c = 0;
	for (const d of doses) {
		if (d.startMs > tMs) break;
		c += singleDoseConcentration(d.doseMg, d.durationH, (tMs - d.startMs) / HOUR_MS, kPerH, volumeL);
	}
	return c;
}

/** Amount infused between aMs and bMs, mg. */
export function amountInfusedBetween(doses: readonly HistoryDose[], aMs: number, bMs: number): number {
	let mg = 0;
	for (const d of doses) {
		const endMs = d.startMs + d.durationH * HOUR_MS;
		if (d.durationH < 1e-9) {
			if (d.startMs > aMs && d.startMs <= bMs) mg += d.doseMg;
			continue;
		}
		const overlapMs = Math.min(endMs, bMs) - Math.max(d.startMs, aMs);
		if (overlapMs > 0) mg += (d.doseMg * overlapMs) / (endMs - d.startMs);
	}
	return mg;
}

/**
 * Area under the concentration curve between aMs and bMs, mg·h/L, exact by mass balance of the one-compartment
 * model: CL·AUC = amount infused − V·(C(b) − C(a)).
 */
export function aucBetween(doses: readonly HistoryDose[], clearanceLPerH: number, volumeL: number, aMs: number, bMs: number): number {
	const kPerH = clearanceLPerH / volumeL;
	const input = amountInfusedBetween(doses, aMs, bMs);
	const change = volumeL * (concentrationAtMs(doses, kPerH, volumeL, bMs) - concentrationAtMs(doses, kPerH, volumeL, aMs));
	return (input - change) / clearanceLPerH;
}

/**
 * The dose whose infusion is running at tMs (start < t < end), or null. A sample taken at the very minute a dose
 * starts was drawn before it (pre-dose), and one taken at its end is its end-of-infusion level.
 */
export function infusionRunningAt(doses: readonly HistoryDose[], tMs: number): HistoryDose | null {
	for (const d of doses) {
		if (d.startMs >= tMs) break;
		if (d.durationH > 0 && tMs < d.startMs + d.durationH * HOUR_MS) return d;
	}
	return null;
}

/**
 * Per-level design for a fit: for each time, the doses before it as (dose, duration, elapsed). The
 * prediction for any (k, V) then needs no date arithmetic (the fit evaluates it hundreds of times).
 */
export type PreparedTimes = { doseMg: Float64Array; durationH: Float64Array; elapsedH: Float64Array; offsets: Int32Array };

export function prepareTimes(doses: readonly HistoryDose[], timesMs: readonly number[]): PreparedTimes {
	const rows: { doseMg: number; durationH: number; elapsedH: number }[] = [];
	const offsets = new Int32Array(timesMs.length + 1);
	timesMs.forEach((tMs, j) => {
		offsets[j] = rows.length;
		for (const d of doses) {
			if (d.startMs > tMs) break;
			rows.push({ doseMg: d.doseMg, durationH: d.durationH, elapsedH: (tMs - d.startMs) / HOUR_MS });
		}
	});
	offsets[timesMs.length] = rows.length;
	return {
		doseMg: Float64Array.from(rows, (r) => r.doseMg),
		durationH: Float64Array.from(rows, (r) => r.durationH),
		elapsedH: Float64Array.from(rows, (r) => r.elapsedH),
		offsets
	};
}

/** Predicted concentrations at the prepared times for (k, V), written into `out`. */
export function predictPrepared(p: PreparedTimes, kPerH: number, volumeL: number, out: Float64Array): Float64Array {
	for (let j = 0; j < out.length; j++) {
		let c = 0;
		for (let r = p.offsets[j]; r < p.offsets[j + 1]; r++) c += singleDoseConcentration(p.doseMg[r], p.durationH[r], p.elapsedH[r], kPerH, volumeL);
		out[j] = c;
	}
	return out;
}
