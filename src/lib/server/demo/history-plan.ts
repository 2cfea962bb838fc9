// The Larkspur Bay Hospital's past, as a plan: who lay in which bed over the last N days, which
// anti-infectives they were given and when (doses and drug levels too: dosing.ts), and every feed message the hospital's systems sent about
// them (admissions, results, orders, stops, discharges), each at the time it was received. Pure and
// deterministic: the same `now` and days give the same plan. history.ts plays it through the feed.
//
// Every bed keeps a timeline that ends with today's inpatient (the 120 seeded patients, lbh-p-0001…)
// and runs backwards through earlier patients (lbh-h-…) until before the first day, so the census is
// the hospital's all along and the last day is the hospital `npm start` has always shown.
import { hashString, mulberry32 } from '../../domain/random';
import type { Route } from '../../domain/vocabulary';
import {
	albuminAt,
	albuminEntry,
	creatinineAt,
	creatinineEntry,
	demoPrescribers,
	dialysisEntry,
	dialysisSessions,
	drawTimes,
	encounterEntry,
	heightEntry,
	onDialysis,
	orderEntry,
	patientEntry,
	planFor,
	practitionerEntry,
	practitionerRoleEntry,
	regimenFor,
	SEED_PATIENTS,
	stopEntry,
	WARDS,
	weightEntry,
	type DemoPrescriber,
	type FhirEntry,
	type PatientPlan
} from './hospital';
import { dosingDeliveries } from './dosing';

export const DAY_MS = 86_400_000;
export const HOUR_MS = 3_600_000;

/** Laboratory turnaround: a sample drawn at 06:00 reaches the feed at 06:50; point-of-care at once. */
const LAB_TURNAROUND_MS = 50 * 60_000;
const POINT_OF_CARE_MS = 10 * 60_000;

export type PlannedOrder = {
	sourceId: string;
	agentCode: string;
	route: Extract<Route, 'iv' | 'po'>;
	regimen: { doseMg: number; intervalH: number; infusionH: number };
	startAt: Date;
	/** the course's end or the discharge; null while it runs past `now` */
	stopAt: Date | null;
	prescriber: DemoPrescriber;
};

export type Stay = {
	plan: PatientPlan;
	bed: string;
	admittedAt: Date;
	/** null: still in hospital at `now` */
	dischargedAt: Date | null;
	orders: PlannedOrder[];
};

/** A feed message the hospital sent: its entries, received at `at`. */
export type FeedDelivery = { at: Date; entries: FhirEntry[] };

const bedsOf = (ward: (typeof WARDS)[number]) => Array.from({ length: ward.beds }, (_, i) => `${ward.prefix}-${String(i + 1).padStart(2, '0')}`);

/** Today's inpatients in their beds, as the seeded hospital has always placed them. */
function currentOccupants(now: Date) {
	const byBed = new Map<string, { plan: PatientPlan; admittedAt: Date }>();
	const used = new Map<string, number>();
	for (let i = 1; i <= SEED_PATIENTS; i++) {
		const plan = planFor(`lbh-p-${String(i).padStart(4, '0')}`);
		const ward = WARDS.find((w) => w.name === plan.ward) ?? WARDS[0];
		const n = (used.get(ward.name) ?? 0) + 1;
		used.set(ward.name, n);
		byBed.set(`${ward.prefix}-${String(n).padStart(2, '0')}`, { plan, admittedAt: new Date(now.getTime() - plan.admittedDaysAgo * DAY_MS) });
	}
	return byBed;
}

/** An earlier patient of a bed, placed on that bed's ward, with an MRN no one else has. */
function earlierPatient(bed: string, k: number, ward: PatientPlan['ward'], mrns: Set<string>): PatientPlan {
	for (let attempt = 0; ; attempt++) {
		const plan = planFor(`lbh-h-${bed}-${String(k).padStart(3, '0')}${attempt ? `-${attempt}` : ''}`);
		if (mrns.has(plan.mrn)) continue;
		mrns.add(plan.mrn);
		return { ...plan, ward };
	}
}

/** How long an anti-infective course lasts (days), when the patient stays long enough to finish it. */
function courseDays(plan: PatientPlan, k: number): number {
	return 5 + (hashString(`${plan.sourceId}:course:${k}`) % 6);
}

function ordersOf(plan: PatientPlan, admittedAt: Date, dischargedAt: Date | null, now: Date, prescribers: DemoPrescriber[]): PlannedOrder[] {
	return plan.orders.map((o, k) => {
		const startAt = new Date(Math.min(now.getTime() - 2 * HOUR_MS, admittedAt.getTime() + (3 + 9 * k + (hashString(`${plan.sourceId}:${k}`) % 10)) * HOUR_MS));
		const days = (startAt.getTime() - admittedAt.getTime()) / DAY_MS;
		const regimen = regimenFor(plan, o.agentCode, o.route, o.renallyAdjusted, creatinineAt(plan, days));
		// an earlier patient's course ends after its days or at discharge; today's inpatients are still on theirs
		const courseEnd = dischargedAt ? new Date(startAt.getTime() + courseDays(plan, k) * DAY_MS) : null;
		const end = dischargedAt && courseEnd && dischargedAt < courseEnd ? dischargedAt : courseEnd;
		return {
			sourceId: `lbh-rx-${plan.sourceId.slice(6)}-${k + 1}`,
			agentCode: o.agentCode,
			route: o.route,
			regimen: { doseMg: regimen.doseMg, intervalH: regimen.intervalH, infusionH: regimen.infusionH },
			startAt,
			stopAt: end && end <= now ? end : null,
			prescriber: prescribers[hashString(`${plan.sourceId}:rx:${k}`) % prescribers.length]
		};
	});
}

/**
 * Every stay that overlaps the last `days` days: today's 120 inpatients and, bed by bed, the patients
 * before them (a few hours to a day between one discharge and the next admission).
 */
export function planStays(now: Date, days: number): Stay[] {
	const start = now.getTime() - days * DAY_MS;
	const prescribers = demoPrescribers();
	const current = currentOccupants(now);
	const mrns = new Set([...current.values()].map((c) => c.plan.mrn));
	const stays: Stay[] = [];
	for (const ward of WARDS) {
		// a busy ward lends a bed or two beyond its count (the seeded census places patients that way)
		const overflow = [...current.keys()].filter((b) => b.startsWith(`${ward.prefix}-`) && !bedsOf(ward).includes(b));
		for (const bed of [...bedsOf(ward), ...overflow]) {
			const occupant = current.get(bed);
			let nextAdmission = now.getTime();
			if (occupant) {
				stays.push({
					plan: occupant.plan,
					bed,
					admittedAt: occupant.admittedAt,
					dischargedAt: null,
					orders: ordersOf(occupant.plan, occupant.admittedAt, null, now, prescribers)
				});
				nextAdmission = occupant.admittedAt.getTime();
			}
			for (let k = 1; nextAdmission > start; k++) {
				const plan = earlierPatient(bed, k, ward.name, mrns);
				const rng = mulberry32(hashString(`${plan.sourceId}:bed`));
				// the bed is cleaned and made up: 3 to 30 hours empty
				const dischargedAt = new Date(nextAdmission - (3 + rng() * 27) * HOUR_MS);
				const admittedAt = new Date(dischargedAt.getTime() - plan.losDays * DAY_MS);
				stays.push({ plan, bed, admittedAt, dischargedAt, orders: ordersOf(plan, admittedAt, dischargedAt, now, prescribers) });
				nextAdmission = admittedAt.getTime();
			}
		}
	}
	return stays.filter((s) => (s.dischargedAt?.getTime() ?? Infinity) > start);
}

const round1 = (v: number) => Number(v.toFixed(1));

/**
 * What the hospital's systems sent about one stay, from the later of its admission and `from`: the
 * admission (patient, encounter, height and weight, admission bloods), morning bloods (and the ICU's
 * evening point-of-care creatinine), ICU weights, dialysis sessions, the orders and their stops, and
 * the discharge. Entries before `from` are left out except what the first message needs to describe
 * a patient already in hospital.
 */
export function deliveriesOf(stay: Stay, from: Date, now: Date): FeedDelivery[] {
	const { plan, bed, admittedAt, dischargedAt } = stay;
	const out: FeedDelivery[] = [];
	const until = dischargedAt ?? now;
	const days = (at: Date) => (at.getTime() - admittedAt.getTime()) / DAY_MS;
	const known = (at: Date) => new Date(Math.max(at.getTime(), from.getTime()));
	const iso = (d: Date) => d.toISOString();

	// admission: the patient, the encounter, height and weight an hour later, admission bloods at 1.5 h
	const measured = new Date(admittedAt.getTime() + HOUR_MS);
	const bloods = new Date(admittedAt.getTime() + 1.5 * HOUR_MS);
	out.push({ at: known(admittedAt), entries: [patientEntry(plan, now), encounterEntry(plan, bed, admittedAt)] });
	out.push({ at: known(measured), entries: [heightEntry(plan, measured), weightEntry(plan, plan.weightKg, measured)] });
	if (bloods <= until)
		out.push({
			at: known(new Date(bloods.getTime() + LAB_TURNAROUND_MS)),
			entries: [
				creatinineEntry(plan, creatinineAt(plan, days(bloods), iso(bloods)), bloods),
				albuminEntry(plan, albuminAt(plan, days(bloods), iso(bloods)), bloods)
			]
		});

	// ward bloods from the first morning after admission (and after `from`)
	const drawsFrom = new Date(Math.max(from.getTime(), bloods.getTime() + 6 * HOUR_MS));
	let mornings = 0;
	const received: Date[] = [];
	for (const d of drawTimes(plan, drawsFrom, until)) {
		const entries = [creatinineEntry(plan, creatinineAt(plan, days(d.at), iso(d.at)), d.at, d.pointOfCare)];
		if (!d.pointOfCare) {
			mornings++;
			// albumin every other morning; daily in sepsis
			if (plan.scenario === 'sepsis' || mornings % 2 === 0) entries.push(albuminEntry(plan, albuminAt(plan, days(d.at), iso(d.at)), d.at));
			if (plan.ward === 'ICU')
				entries.push(weightEntry(plan, round1(plan.weightKg * (1 + (mulberry32(hashString(`${plan.sourceId}:wt:${iso(d.at)}`))() - 0.5) * 0.04)), d.at));
		}
		const receivedAt = new Date(d.at.getTime() + (d.pointOfCare ? POINT_OF_CARE_MS : LAB_TURNAROUND_MS));
		if (receivedAt <= now) {
			out.push({ at: receivedAt, entries });
			received.push(receivedAt);
		}
	}
	if (onDialysis(plan)) {
		for (const at of dialysisSessions(plan, new Date(Math.max(from.getTime(), admittedAt.getTime())), until)) {
			out.push({ at: new Date(at.getTime() + 4 * HOUR_MS), entries: [dialysisEntry(plan, at)] });
		}
	}

	// orders as prescribed, stopped at the course's end or the discharge; the doses given and, for some
	// vancomycin and aminoglycoside patients, their levels
	for (const o of stay.orders) {
		if (o.stopAt && o.stopAt <= from) continue;
		out.push({ at: known(o.startAt), entries: [orderEntry(plan, o.sourceId, o.agentCode, o.route, o.regimen, o.startAt, o.prescriber)] });
		if (o.stopAt) out.push({ at: o.stopAt, entries: [stopEntry(o.sourceId, plan.sourceId, o.stopAt)] });
		// the ward's medication record goes out with the results (one message, one re-assessment)
		out.push(...dosingDeliveries(plan, creatinineAt(plan, days(o.startAt)), o, from, until, received));
	}
	if (dischargedAt && dischargedAt <= now) out.push({ at: dischargedAt, entries: [encounterEntry(plan, bed, admittedAt, dischargedAt)] });
	return out;
}

/** The prescribers' directory, sent once before any order names them. */
export function directoryEntries(): FhirEntry[] {
	return demoPrescribers().flatMap((p) => [practitionerEntry(p), practitionerRoleEntry(p)]);
}

/**
 * The whole feed of the last `days` days, grouped into one message per hour (received at the end of
 * that hour, as an interface engine batching its queue would send it), oldest first.
 */
export function hourlyFeed(stays: Stay[], now: Date, days: number): FeedDelivery[] {
	const from = new Date(now.getTime() - days * DAY_MS);
	const byHour = new Map<number, FhirEntry[]>();
	for (const stay of stays) {
		for (const d of deliveriesOf(stay, from, now)) {
			const hourEnd = Math.min(now.getTime(), Math.floor(d.at.getTime() / HOUR_MS) * HOUR_MS + HOUR_MS);
			const list = byHour.get(hourEnd) ?? [];
			list.push(...d.entries);
			byHour.set(hourEnd, list);
		}
	}
	const hours = [...byHour.keys()].sort((a, b) => a - b);
	const feed = hours.map((h) => ({ at: new Date(h), entries: byHour.get(h) as FhirEntry[] }));
	if (feed.length > 0) feed[0] = { at: feed[0].at, entries: [...directoryEntries(), ...feed[0].entries] };
	return feed;
}
