// The demo simulator: plays Larkspur Bay Hospital forward through the same feed as real data. Each
// tick draws blood from the patients whose creatinine is oldest (values follow each patient's
// planned course), discharges patients whose stay is over (stopping their orders), admits new ones
// to keep the census, now and then switches a patient's anti-infective, and records the doses of
// vancomycin and aminoglycosides given since the last tick and the levels drawn (dosing.ts).
import { sql } from 'drizzle-orm';
import { hashString, mulberry32 } from '../../domain/random';
import { envNumber } from '../config';
import { getDb, type Database } from '../db';
import { ingestBundle, type IngestResult, bundleSchema } from '../feed';
import {
	albuminAt,
	albuminEntry,
	bundle,
	creatinineAt,
	creatinineEntry,
	dialysisEntry,
	dialysisSessions,
	onDialysis,
	DEMO_CENSUS,
	demoPrescribers,
	encounterEntry,
	heightEntry,
	orderEntry,
	patientEntry,
	planFor,
	regimenFor,
	stopEntry,
	WARDS,
	weightEntry,
	type FhirEntry,
	type PatientPlan
} from './hospital';
import { dosingDeliveries } from './dosing';

const DAY_MS = 86_400_000;
const HOUR_MS = 3_600_000;

/** Minutes between ticks (EBBLINE_SIMULATOR_EVERY, 1–59; default 2). */
export function simulatorEveryMinutes(): number {
	return Math.min(59, Math.max(1, Math.round(envNumber('EBBLINE_SIMULATOR_EVERY', 2))));
}

/** Patients sampled per tick (EBBLINE_SIMULATOR_DRAWS; default 8): the pace of new results. */
export function simulatorDraws(): number {
	return Math.max(0, Math.round(envNumber('EBBLINE_SIMULATOR_DRAWS', 8)));
}

const MAX_DISCHARGES_PER_TICK = 3;
const MAX_ADMISSIONS_PER_TICK = 2;
/** chance per tick that a prescriber switches one patient's anti-infective */
const SWITCH_CHANCE = 0.15;

type Inpatient = {
	patient: string;
	encounter: string;
	ward: string;
	bed: string | null;
	admitted_at: Date;
	last_creatinine: Date | null;
	last_albumin: Date | null;
	last_weight: Date | null;
};

type ActiveOrder = {
	order_id: string;
	patient: string;
	code: string;
	start_at: Date | string;
	route: string;
	dose_mg: number;
	interval_h: number;
	infusion_h: number;
};

const compact = (d: Date) =>
	d
		.toISOString()
		.replace(/[-:TZ.]/g, '')
		.slice(0, 12);
const asDate = (v: unknown) => (v === null || v === undefined ? null : v instanceof Date ? v : new Date(v as string));

export type TickSummary = {
	at: string;
	draws: number;
	admissions: number;
	discharges: number;
	switches: number;
	entries: number;
	ingest: Pick<IngestResult, 'counts' | 'ordersQueued' | 'messageId'> | null;
};

export async function simulateTick(options: { now?: Date; draws?: number; db?: Database } = {}): Promise<TickSummary> {
	const now = options.now ?? new Date();
	const db = options.db ?? getDb();
	const rng = mulberry32(hashString(`tick:${now.toISOString()}`));
	const inpatients = Array.from(
		(await db.execute(sql`
			select p.source_id as patient, e.source_id as encounter, e.ward, e.bed, e.admitted_at,
				(select max(observed_at) from lab_results r where r.patient_id = p.id and r.analyte = 'creatinine') as last_creatinine,
				(select max(observed_at) from lab_results r where r.patient_id = p.id and r.analyte = 'albumin') as last_albumin,
				(select max(observed_at) from body_measurements b where b.patient_id = p.id and b.kind = 'weight') as last_weight
			from encounters e
			join patients p on p.id = e.patient_id
			where e.discharged_at is null and p.source_id like 'lbh-%' and e.source_id like 'lbh-%'
			order by e.admitted_at`)) as unknown as Iterable<Record<string, unknown>>
	).map((r) => ({
		...(r as Inpatient),
		admitted_at: asDate(r.admitted_at) as Date,
		last_creatinine: asDate(r.last_creatinine),
		last_albumin: asDate(r.last_albumin),
		last_weight: asDate(r.last_weight)
	}));
	const activeOrders = Array.from(
		(await db.execute(sql`
			select o.source_id as order_id, p.source_id as patient, a.code, o.start_at, o.route, o.dose_mg, o.interval_h, o.infusion_h
			from orders o join patients p on p.id = o.patient_id join agents a on a.id = o.agent_id
			where o.status = 'active' and p.source_id like 'lbh-%' and o.source_id is not null
			order by o.start_at`)) as unknown as Iterable<ActiveOrder>
	);
	const ordersOf = new Map<string, ActiveOrder[]>();
	for (const o of activeOrders) ordersOf.set(o.patient, [...(ordersOf.get(o.patient) ?? []), o]);

	const entries: FhirEntry[] = [];
	// the directory was sent with the seed: orders name their prescriber by Practitioner id
	const prescribers = demoPrescribers();
	const days = (plan: PatientPlan, admittedAt: Date) => (now.getTime() - admittedAt.getTime()) / DAY_MS;

	// ── Discharges: the stay is over ──────────────────────────────────────────────────────────────
	const leaving = inpatients.filter((p) => days(planFor(p.patient), p.admitted_at) > planFor(p.patient).losDays).slice(0, MAX_DISCHARGES_PER_TICK);
	for (const p of leaving) {
		const plan = { ...planFor(p.patient), ward: p.ward as PatientPlan['ward'] };
		const enc = encounterEntry(plan, p.bed ?? '', p.admitted_at, now);
		(enc.resource as { id: string }).id = p.encounter;
		entries.push(enc);
		for (const o of ordersOf.get(p.patient) ?? []) entries.push(stopEntry(o.order_id, p.patient, now));
	}
	const staying = inpatients.filter((p) => !leaving.includes(p));

	// ── Admissions: keep the census ───────────────────────────────────────────────────────────────
	const bedsTaken = new Set(staying.map((p) => p.bed));
	const admissions = Math.min(MAX_ADMISSIONS_PER_TICK, Math.max(0, DEMO_CENSUS - staying.length));
	for (let k = 0; k < admissions; k++) {
		const plan = planFor(`lbh-s-${compact(now)}-${k}`);
		const ward = [WARDS.find((w) => w.name === plan.ward), ...WARDS].find(
			(w) => w && Array.from({ length: w.beds }, (_, i) => `${w.prefix}-${String(i + 1).padStart(2, '0')}`).some((b) => !bedsTaken.has(b))
		);
		if (!ward) break;
		const bed = Array.from({ length: ward.beds }, (_, i) => `${ward.prefix}-${String(i + 1).padStart(2, '0')}`).find((b) => !bedsTaken.has(b)) as string;
		bedsTaken.add(bed);
		const placed = { ...plan, ward: ward.name };
		const admittedAt = new Date(now.getTime() - HOUR_MS);
		const sampled = new Date(now.getTime() - 30 * 60_000);
		entries.push(
			patientEntry(placed, now),
			encounterEntry(placed, bed, admittedAt),
			heightEntry(placed, sampled),
			weightEntry(placed, placed.weightKg, sampled),
			creatinineEntry(placed, creatinineAt(placed, 0, sampled.toISOString()), sampled),
			albuminEntry(placed, albuminAt(placed, 0, sampled.toISOString()), sampled)
		);
		placed.orders.forEach((o, i) => {
			const regimen = regimenFor(placed, o.agentCode, o.route, o.renallyAdjusted, creatinineAt(placed, 0));
			const prescriber = prescribers[hashString(`${placed.sourceId}:rx:${i}`) % prescribers.length];
			entries.push(
				orderEntry(placed, `lbh-rx-${placed.sourceId.slice(6)}-${i + 1}`, o.agentCode, o.route, regimen, new Date(now.getTime() - 10 * 60_000), prescriber)
			);
		});
	}

	// ── Draws: the patients whose creatinine is oldest ────────────────────────────────────────────
	const drawCount = options.draws ?? simulatorDraws();
	const due = [...staying].sort((a, b) => (a.last_creatinine?.getTime() ?? 0) - (b.last_creatinine?.getTime() ?? 0)).slice(0, drawCount);
	for (const p of due) {
		const plan = { ...planFor(p.patient), ward: p.ward as PatientPlan['ward'] };
		const t = days(plan, p.admitted_at);
		const icu = p.ward === 'ICU';
		entries.push(creatinineEntry(plan, creatinineAt(plan, t, now.toISOString()), now, icu && now.getUTCHours() >= 12));
		const albuminDueH = plan.scenario === 'sepsis' ? 20 : 40;
		if (!p.last_albumin || now.getTime() - p.last_albumin.getTime() > albuminDueH * HOUR_MS) {
			entries.push(albuminEntry(plan, albuminAt(plan, t, now.toISOString()), now));
		}
		// a patient on haemodialysis keeps having sessions (Mon/Wed/Fri): the last day's, once, by its id
		if (onDialysis(plan)) {
			for (const at of dialysisSessions(plan, new Date(now.getTime() - 2 * DAY_MS), now)) entries.push(dialysisEntry(plan, at));
		}
		if (icu && (!p.last_weight || now.getTime() - p.last_weight.getTime() > 24 * HOUR_MS)) {
			entries.push(weightEntry(plan, Number((plan.weightKg * (1 + (rng() - 0.5) * 0.03)).toFixed(1)), now));
		}
	}

	// ── Doses given since the last tick, and the levels drawn for some vancomycin and aminoglycoside patients ──
	// (a window of two ticks: a tick that did not run is caught up; what was sent before is a duplicate)
	const since = new Date(now.getTime() - 2 * simulatorEveryMinutes() * 60_000);
	for (const p of staying) {
		const plan = planFor(p.patient);
		for (const o of ordersOf.get(p.patient) ?? []) {
			const startAt = asDate(o.start_at) as Date;
			const dosed = {
				sourceId: o.order_id,
				agentCode: o.code,
				route: o.route,
				regimen: { doseMg: Number(o.dose_mg), intervalH: Number(o.interval_h), infusionH: Number(o.infusion_h) },
				startAt,
				stopAt: null
			};
			const creatinine = creatinineAt(plan, (startAt.getTime() - p.admitted_at.getTime()) / DAY_MS);
			for (const d of dosingDeliveries(plan, creatinine, dosed, since, now)) entries.push(...d.entries);
		}
	}

	// ── Now and then a prescriber switches an anti-infective ──────────────────────────────────────
	let switches = 0;
	const withOrders = staying.filter((p) => (ordersOf.get(p.patient)?.length ?? 0) > 0);
	if (withOrders.length > 0 && rng() < SWITCH_CHANCE) {
		const p = withOrders[Math.floor(rng() * withOrders.length)];
		const plan = { ...planFor(p.patient), ward: p.ward as PatientPlan['ward'] };
		const current = (ordersOf.get(p.patient) ?? [])[0];
		const choices = ['J01DD04', 'J01CR05', 'J01DH02', 'J01XX08', 'J01DE01', 'J01MA12'].filter((c) => c !== current.code);
		const code = choices[Math.floor(rng() * choices.length)];
		const regimen = regimenFor(plan, code, 'iv', false, creatinineAt(plan, days(plan, p.admitted_at)));
		const prescriber = prescribers[Math.floor(rng() * prescribers.length)];
		entries.push(stopEntry(current.order_id, p.patient, now));
		entries.push(orderEntry(plan, `lbh-rx-${plan.sourceId.slice(6)}-${compact(now)}`, code, 'iv', regimen, now, prescriber));
		switches = 1;
	}

	let ingest: TickSummary['ingest'] = null;
	if (entries.length > 0) {
		const message = bundle(entries);
		const envelope = bundleSchema.parse(message);
		const result = await ingestBundle(JSON.stringify(message), envelope, {
			source: 'simulator',
			actor: { actorId: null, actorLabel: 'demo simulator', requestId: null },
			now,
			db
		});
		ingest = { counts: result.counts, ordersQueued: result.ordersQueued, messageId: result.messageId };
	}
	return { at: now.toISOString(), draws: due.length, admissions, discharges: leaving.length, switches, entries: entries.length, ingest };
}
