// Doses given and drug levels of the demo's vancomycin and aminoglycoside orders: each dose an
// administration (a few minutes late, as on a ward), and for some patients levels drawn as a pharmacist
// would ask for them — vancomycin a trough 30 min before a dose, often with a peak an hour after the
// infusion of the same interval; an aminoglycoside a post-dose pair. Each level is computed from a
// one-compartment model of the doses given, with the patient's own clearance and volume drawn around
// population values, plus assay noise. The ward acts on a high vancomycin trough as wards do: it holds
// the doses (each recorded as not given) and draws a level each day until the drug has fallen. Invented
// and deterministic (seeded by the order's id).
import { cockcroftGaultRaw } from '../../clinical/renal-function';
import { hashString, mulberry32 } from '../../domain/random';
import { ATC_SYSTEM, LEVEL_CODES, levelCodeOfAgent, LOINC_SYSTEM } from '../feed';
import type { FhirEntry, PatientPlan } from './hospital';

const HOUR_MS = 3_600_000;
const MIN_MS = 60_000;
const UCUM = 'http://unitsofmeasure.org';
const VANCOMYCIN = 'J01XA01';
const AMINOGLYCOSIDES = new Set(['J01GB03', 'J01GB01', 'J01GB06']);

/** Laboratory turnaround of a drug level: drawn, then in the feed 50 min later. */
export const LEVEL_TURNAROUND_MS = 50 * MIN_MS;
/** Share of these orders whose patient has levels drawn. */
const LEVELS_SHARE = 0.6;
/**
 * The ward holds vancomycin once a trough above this comes back (common practice: troughs above
 * 15–20 mg/L go with kidney injury, Rybak MJ et al., Am J Health Syst Pharm 2020;77:835–864), then
 * draws a random level every 24 h until one is below HOLD_UNTIL_BELOW_MGL (common practice).
 */
export const HOLD_ABOVE_TROUGH_MGL = 20;
export const HOLD_UNTIL_BELOW_MGL = 15;

export type DosedOrder = {
	sourceId: string;
	agentCode: string;
	route: string;
	regimen: { doseMg: number; intervalH: number; infusionH: number };
	/** the first dose */
	startAt: Date;
	/** no doses from here (stopped order); null while it runs */
	stopAt: Date | null;
};
/** `k`: the dose's number in the order (from 0); `plannedAt`: when it was due */
export type GivenDose = { k: number; plannedAt: Date; startAt: Date; endAt: Date; doseMg: number };
export type DrawnLevel = { at: Date; timing: 'trough' | 'peak' | 'random'; mgL: number };
/** A ward's hold of the order's doses: from when the high trough's result came back. */
export type WardHold = { trough: DrawnLevel; from: Date };

/** Whether the demo records the order's doses (IV vancomycin and aminoglycosides). */
export function recordsDoses(order: Pick<DosedOrder, 'agentCode' | 'route'>): boolean {
	return order.route === 'iv' && (order.agentCode === VANCOMYCIN || AMINOGLYCOSIDES.has(order.agentCode));
}

/** The doses given from the order's start up to `until` (started, and ended by `until`), 0–24 min late. */
export function givenDoses(order: DosedOrder, until: Date): GivenDose[] {
	const out: GivenDose[] = [];
	const { doseMg, intervalH, infusionH } = order.regimen;
	const end = Math.min(until.getTime(), order.stopAt?.getTime() ?? Infinity);
	for (let k = 0; ; k++) {
		const planned = order.startAt.getTime() + k * intervalH * HOUR_MS;
		if (planned >= end) break;
		const late = (hashString(`${order.sourceId}:dose:${k}`) % 25) * MIN_MS;
		const startAt = new Date(planned + late);
		const endAt = new Date(startAt.getTime() + infusionH * HOUR_MS + (hashString(`${order.sourceId}:run:${k}`) % 8) * MIN_MS);
		if (endAt.getTime() > until.getTime()) break;
		out.push({ k, plannedAt: new Date(planned), startAt, endAt, doseMg });
	}
	return out;
}

function normal(rng: () => number): number {
	return Math.sqrt(-2 * Math.log(1 - rng())) * Math.cos(2 * Math.PI * rng());
}

/**
 * The patient's own clearance (L/h) and volume (L), drawn around population values (inter-individual
 * variability about 25 % on clearance, 15 % on volume): vancomycin CL = 0.689·CrCl + 3.66 mL/min and
 * V = 0.7 L/kg (Matzke GR et al., Antimicrob Agents Chemother 1984;25:433–437); aminoglycosides
 * k = 0.00293·CrCl + 0.014 /h and V = 0.26 L/kg (Dettli's approach as in Winter, Basic Clinical
 * Pharmacokinetics; common practice).
 */
export function patientKinetics(plan: Pick<PatientPlan, 'ageYears' | 'sex' | 'weightKg'>, creatinineMgDl: number, order: DosedOrder) {
	const crcl = Math.min(150, Math.max(5, cockcroftGaultRaw(plan.ageYears, plan.sex === 'female', plan.weightKg, Math.max(0.6, creatinineMgDl))));
	const rng = mulberry32(hashString(`${order.sourceId}:pk`));
	const eta = { cl: 0.25 * normal(rng), v: 0.15 * normal(rng) };
	let clLH: number;
	let vL: number;
	if (order.agentCode === VANCOMYCIN) {
		clLH = ((0.689 * crcl + 3.66) * 60) / 1000;
		vL = 0.7 * plan.weightKg;
	} else {
		vL = 0.26 * plan.weightKg;
		clLH = (0.00293 * crcl + 0.014) * vL;
	}
	return { clLH: clLH * Math.exp(eta.cl), vL: vL * Math.exp(eta.v) };
}

/** Concentration (mg/L) at `at`: superposition of zero-order infusions, first-order elimination. */
export function concentrationAt(doses: GivenDose[], kin: { clLH: number; vL: number }, at: Date): number {
	const k = kin.clLH / kin.vL;
	let c = 0;
	for (const d of doses) {
		const t = (at.getTime() - d.startAt.getTime()) / HOUR_MS;
		if (t <= 0) continue;
		const durH = Math.max(1 / 60, (d.endAt.getTime() - d.startAt.getTime()) / HOUR_MS);
		const rate = d.doseMg / durH;
		const plateau = rate / kin.clLH;
		c += t <= durH ? plateau * (1 - Math.exp(-k * t)) : plateau * (1 - Math.exp(-k * durH)) * Math.exp(-k * (t - durH));
	}
	return c;
}

/**
 * The levels drawn for the order up to `until` (none for 40 % of patients): around the 4th dose and
 * every three days after. `doses` are the order's doses given up to at least `until`.
 */
export function drawnLevels(order: DosedOrder, doses: GivenDose[], kin: { clLH: number; vL: number }, until: Date): DrawnLevel[] {
	if (!recordsDoses(order) || (hashString(`${order.sourceId}:levels`) % 100) / 100 >= LEVELS_SHARE) return [];
	const rng = mulberry32(hashString(`${order.sourceId}:assay`));
	const vanco = order.agentCode === VANCOMYCIN;
	const every = Math.max(2, Math.round(72 / order.regimen.intervalH));
	const pair = vanco ? hashString(`${order.sourceId}:pair`) % 3 !== 0 : true;
	const draws: { at: Date; timing: DrawnLevel['timing'] }[] = [];
	for (let k = vanco || order.regimen.intervalH < 24 ? 2 : 0; k < doses.length; k += every) {
		const dose = doses[k];
		const next = doses[k + 1];
		const peakAt = new Date(dose.endAt.getTime() + (30 + (hashString(`${order.sourceId}:peak:${k}`) % 31)) * MIN_MS);
		if (pair) draws.push({ at: peakAt, timing: 'peak' });
		if (order.regimen.intervalH >= 24 && !vanco) draws.push({ at: new Date(dose.endAt.getTime() + (8 + (k % 3)) * HOUR_MS), timing: 'random' });
		else if (next) draws.push({ at: new Date(next.startAt.getTime() - 30 * MIN_MS), timing: 'trough' });
	}
	return draws
		.filter((d) => d.at <= until && (!order.stopAt || d.at <= order.stopAt))
		.map((d) => ({ ...d, mgL: assay(concentrationAt(doses, kin, d.at), vanco, rng) }));
}

/** What the laboratory reports for a true concentration: 5 % proportional and a small additive error, to 0.1 mg/L. */
function assay(mgL: number, vanco: boolean, rng: () => number): number {
	const noisy = mgL * (1 + 0.05 * normal(rng)) + (vanco ? 0.3 : 0.05) * normal(rng);
	return Math.max(0, Math.round(noisy * 10) / 10);
}

/**
 * The ward's hold of a vancomycin order: the first of its levels that is a trough above
 * HOLD_ABOVE_TROUGH_MGL, held from when its result came back; null when there is none. A level depends
 * only on the doses before it, so the hold is the same whatever time the levels run to once the trough
 * is drawn (the simulator plays the order forward one tick at a time).
 */
export function wardHold(order: DosedOrder, levels: DrawnLevel[]): WardHold | null {
	if (order.agentCode !== VANCOMYCIN) return null;
	const trough = levels.find((l) => l.timing === 'trough' && l.mgL > HOLD_ABOVE_TROUGH_MGL);
	return trough ? { trough, from: new Date(trough.at.getTime() + LEVEL_TURNAROUND_MS) } : null;
}

/** The doses due from the hold up to `until` (and the order's stop), each recorded by the ward as not given. */
export function heldDoses(order: DosedOrder, hold: WardHold, until: Date): { plannedAt: Date; doseMg: number }[] {
	const out: { plannedAt: Date; doseMg: number }[] = [];
	const end = Math.min(until.getTime(), order.stopAt?.getTime() ?? Infinity);
	const first = Math.max(0, Math.ceil((hold.from.getTime() - order.startAt.getTime()) / (order.regimen.intervalH * HOUR_MS)));
	for (let k = first; ; k++) {
		const planned = order.startAt.getTime() + k * order.regimen.intervalH * HOUR_MS;
		if (planned > end) break;
		out.push({ plannedAt: new Date(planned), doseMg: order.regimen.doseMg });
	}
	return out;
}

/** The random levels drawn while the doses are held: every 24 h after the high trough, until one is below HOLD_UNTIL_BELOW_MGL. */
export function levelsWhileHeld(order: DosedOrder, doses: GivenDose[], kin: { clLH: number; vL: number }, hold: WardHold, until: Date): DrawnLevel[] {
	const rng = mulberry32(hashString(`${order.sourceId}:held`));
	const out: DrawnLevel[] = [];
	for (let day = 1; ; day++) {
		const at = new Date(hold.trough.at.getTime() + day * 24 * HOUR_MS);
		if (at > until || (order.stopAt && at > order.stopAt)) break;
		const level: DrawnLevel = { at, timing: 'random', mgL: assay(concentrationAt(doses, kin, at), true, rng) };
		out.push(level);
		if (level.mgL < HOLD_UNTIL_BELOW_MGL) break;
	}
	return out;
}

const iso = (d: Date) => d.toISOString().replace(/\.\d{3}Z$/, 'Z');

/** A MedicationAdministration of the order, named by the time the dose was due (after a change of interval, the new doses are new records). */
function administrationResource(patientSourceId: string, order: DosedOrder, plannedAt: Date, doseMg: number, fields: Record<string, unknown>): FhirEntry {
	const id = `${order.sourceId}-ma-${Math.round(plannedAt.getTime() / MIN_MS)}`;
	return {
		fullUrl: `urn:uuid:${id}`,
		resource: {
			resourceType: 'MedicationAdministration',
			id,
			...fields,
			medicationCodeableConcept: { coding: [{ system: ATC_SYSTEM, code: order.agentCode }] },
			subject: { reference: `Patient/${patientSourceId}` },
			request: { reference: `MedicationRequest/${order.sourceId}` },
			dosage: { route: { text: 'intravenous' }, dose: { value: doseMg, unit: 'mg', system: UCUM, code: 'mg' } }
		}
	};
}

export function administrationEntry(patientSourceId: string, order: DosedOrder, dose: GivenDose): FhirEntry {
	return administrationResource(patientSourceId, order, dose.plannedAt, dose.doseMg, {
		status: 'completed',
		effectivePeriod: { start: iso(dose.startAt), end: iso(dose.endAt) }
	});
}

/** A dose the ward held: status not-done, at the time it was due. */
export function heldEntry(patientSourceId: string, order: DosedOrder, dose: { plannedAt: Date; doseMg: number }): FhirEntry {
	return administrationResource(patientSourceId, order, dose.plannedAt, dose.doseMg, {
		status: 'not-done',
		statusReason: [{ text: `held: vancomycin trough above ${HOLD_ABOVE_TROUGH_MGL} mg/L` }],
		effectiveDateTime: iso(dose.plannedAt)
	});
}

export function levelEntry(patientSourceId: string, order: DosedOrder, level: DrawnLevel): FhirEntry {
	// the codes the feed reads (feed/drug-levels.ts)
	const code = levelCodeOfAgent(order.agentCode, level.timing) as string;
	const id = `${order.sourceId}-lv-${Math.round(level.at.getTime() / MIN_MS)}`;
	return {
		fullUrl: `urn:uuid:${id}`,
		resource: {
			resourceType: 'Observation',
			id,
			status: 'final',
			code: { coding: [{ system: LOINC_SYSTEM, code, display: LEVEL_CODES[code].name }] },
			subject: { reference: `Patient/${patientSourceId}` },
			effectiveDateTime: iso(level.at),
			valueQuantity: { value: level.mgL, unit: 'mg/L', system: UCUM, code: 'mg/L' }
		}
	};
}

/**
 * What the ward's medication record and the laboratory sent about the order in (from, until]: each
 * level 50 min after it was drawn; each administration when its infusion ended, or, given `batches`
 * (the times the ward's record is exported: the morning results), with the first export or level
 * after it (the doses still unsent go at `until`).
 */
export function dosingDeliveries(
	plan: Pick<PatientPlan, 'sourceId' | 'ageYears' | 'sex' | 'weightKg'>,
	creatinineMgDl: number,
	order: DosedOrder,
	from: Date,
	until: Date,
	batches: Date[] | null = null
): { at: Date; entries: FhirEntry[] }[] {
	if (!recordsDoses(order)) return [];
	// the dose after the last one given decides when a trough is drawn
	const lookahead = new Date(until.getTime() + (order.regimen.intervalH + order.regimen.infusionH + 1) * HOUR_MS);
	const drawnBy = new Date(until.getTime() - LEVEL_TURNAROUND_MS);
	const kin = patientKinetics(plan, creatinineMgDl, order);
	// as if nothing were held; a hold then ends the doses at its start, and no level of these falls in
	// between the high trough and its result (the next peak comes after the dose that follows the trough)
	const unheldDoses = givenDoses(order, lookahead);
	const unheldLevels = drawnLevels(order, unheldDoses, kin, drawnBy);
	const hold = wardHold(order, unheldLevels);
	const doses = hold ? unheldDoses.filter((d) => d.plannedAt < hold.from) : unheldDoses;
	const levels = hold ? [...unheldLevels.filter((l) => l.at <= hold.trough.at), ...levelsWhileHeld(order, doses, kin, hold, drawnBy)] : unheldLevels;
	const out: { at: Date; entries: FhirEntry[] }[] = [];
	const levelTimes: number[] = [];
	for (const level of levels) {
		const at = new Date(level.at.getTime() + LEVEL_TURNAROUND_MS);
		levelTimes.push(at.getTime());
		if (at > from) out.push({ at, entries: [levelEntry(plan.sourceId, order, level)] });
	}
	const exports = batches ? [...batches.map((b) => b.getTime()), ...levelTimes].sort((a, b) => a - b) : null;
	for (const d of doses) {
		if (d.endAt.getTime() > until.getTime()) break;
		const at = exports ? (exports.find((t) => t >= d.endAt.getTime() && t <= until.getTime()) ?? until.getTime()) : d.endAt.getTime();
		if (at > from.getTime()) out.push({ at: new Date(at), entries: [administrationEntry(plan.sourceId, order, d)] });
	}
	// the held doses, recorded when they were due (or with the next export)
	for (const d of hold ? heldDoses(order, hold, until) : []) {
		const due = d.plannedAt.getTime();
		const at = exports ? (exports.find((t) => t >= due && t <= until.getTime()) ?? until.getTime()) : due;
		if (at > from.getTime()) out.push({ at: new Date(at), entries: [heldEntry(plan.sourceId, order, d)] });
	}
	return out;
}
