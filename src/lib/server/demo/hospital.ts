// The invented Larkspur Bay Hospital: inpatients, admissions, anti-infective orders and seven days of
// creatinine, albumin, weight and height, as FHIR R4 bundles that go through the same feed as real
// data. Everything is generated from a seeded PRNG; no real person is described. Each patient's
// course follows one scenario (stable, AKI with onset and recovery, augmented clearance after
// trauma, falling albumin in sepsis, obesity, stable CKD) as a function of time since admission, so
// the simulator can play the same patient forward later.
import { between, hashString, mulberry32, type Rng } from '../../domain/random';
import type { Route, Sex } from '../../domain/vocabulary';
import { bandDoseMg, bandHasRegimen, cockcroftGaultRaw, findBand, roundDoseMg, type AgentParams } from '../../clinical';
import { ATC_SYSTEM, LOINC_SYSTEM, SNOMED_SYSTEM } from '../feed';
import { dosingDeliveries } from './dosing';
// bundled with the app (the simulator runs inside the built server, where a path relative to this file would not exist)
import agentsFixture from '../../../../fixtures/agents.json';
import demoUsersFixture from '../../../../fixtures/demo-users.json';

// ── Deterministic randomness (mulberry32 and friends from src/lib/domain/random.ts) ────────────────
const pick = <T>(rng: Rng, list: readonly T[]): T => list[Math.floor(rng() * list.length) % list.length];
/** approximately normal (sum of uniforms), clamped */
function normalish(rng: Rng, mean: number, sd: number, lo: number, hi: number) {
	const z = (rng() + rng() + rng() + rng() + rng() + rng() - 3) / Math.sqrt(0.5);
	return Math.min(hi, Math.max(lo, mean + z * sd));
}
const round = (v: number, digits: number) => Number(v.toFixed(digits));

// ── The hospital ──────────────────────────────────────────────────────────────────────────────────
export const HOSPITAL_NAME = 'Larkspur Bay Hospital';
export const WARDS = [
	{ name: '3 North Medicine', prefix: '3N', beds: 30 },
	{ name: '5 South Surgery', prefix: '5S', beds: 26 },
	{ name: 'Renal Unit', prefix: 'RU', beds: 18 },
	{ name: 'ICU', prefix: 'ICU', beds: 16 },
	{ name: '4 West Respiratory', prefix: '4W', beds: 20 },
	{ name: '2 East Orthopaedics', prefix: '2E', beds: 18 }
] as const;
export type WardName = (typeof WARDS)[number]['name'];
export const DEMO_CENSUS = 120;
export const SEED_PATIENTS = 120;

const GIVEN_FEMALE = [
	'Rosalind',
	'Imelda',
	'Orla',
	'Marisol',
	'Henrietta',
	'Leonie',
	'Sabine',
	'Thea',
	'Adaeze',
	'Wilhelmina',
	'Perpetua',
	'Ines',
	'Cordelia',
	'Yusra',
	'Delphine',
	'Marta',
	'Saoirse',
	'Eulalie',
	'Beatrix',
	'Noor',
	'Philippa',
	'Zofia',
	'Hester',
	'Anouk',
	'Greer',
	'Lucasta',
	'Ottilie',
	'Rhiannon',
	'Seraphina',
	'Ilse',
	'Mireille',
	'Tamsin'
] as const;
const GIVEN_MALE = [
	'Alaric',
	'Cosmo',
	'Desmond',
	'Evander',
	'Fergal',
	'Gideon',
	'Horatio',
	'Ignatius',
	'Jory',
	'Kasimir',
	'Lorcan',
	'Mortimer',
	'Niall',
	'Oswin',
	'Peregrine',
	'Quillon',
	'Rafferty',
	'Soren',
	'Tiberius',
	'Ulric',
	'Vasco',
	'Wendell',
	'Yannick',
	'Zebedee',
	'Ansel',
	'Barnaby',
	'Crispin',
	'Dorian',
	'Emrys',
	'Florian',
	'Gaspard',
	'Hamish'
] as const;
const FAMILY = [
	'Ashgrove',
	'Brackwater',
	'Caddell',
	'Dunmore',
	'Elderfield',
	'Fairweather',
	'Galloway-Pike',
	'Hollins',
	'Ironside',
	'Jessop',
	'Kettleby',
	'Larchmont',
	'Marwick',
	'Nettleford',
	'Oakhurst',
	'Penhallow',
	'Quarrington',
	'Redmayne',
	'Saltmarsh',
	'Thistlewood',
	'Underhill',
	'Vantongeren',
	'Wexford',
	'Yardley',
	'Abernethy',
	'Blackthorn',
	'Coldridge',
	'Daventry',
	'Esterhuizen',
	'Featherstone',
	'Glennister',
	'Harrowgate',
	'Inchbald',
	'Juniper',
	'Kilbride',
	'Lowenstein',
	'Merriweather',
	'Northcote',
	'Ostrowski',
	'Pemberton-Hale',
	'Quenby',
	'Ravensworth',
	'Stanfield',
	'Trevelyan',
	'Umfreville',
	'Vickery',
	'Whitlock',
	'Zaragoza-Lind'
] as const;

export type Scenario = 'stable' | 'aki' | 'arc' | 'sepsis' | 'obese' | 'ckd';

/** Everything about one patient that does not depend on the clock. */
export type PatientPlan = {
	sourceId: string;
	mrn: string;
	givenName: string;
	familyName: string;
	sex: Sex;
	ageYears: number;
	scenario: Scenario;
	ward: WardName;
	heightCm: number;
	weightKg: number;
	baselineCreatinineMgDl: number;
	baselineAlbuminGL: number;
	/** AKI: days after admission when creatinine starts to rise, days of rise, peak ÷ baseline, recovery time constant */
	aki: { onsetDay: number; riseDays: number; peakRatio: number; recoveryTauDays: number } | null;
	/** sepsis: albumin fall per day and the floor it levels at */
	albuminFall: { perDayGL: number; floorGL: number } | null;
	/** results from the referral laboratory come in mg/dL and g/dL; outside clinic measures in lb and in */
	labUnits: 'si' | 'conventional';
	bodyUnits: 'metric' | 'imperial';
	/** days from admission to discharge */
	losDays: number;
	/** seeded patients: days between admission and the seed */
	admittedDaysAgo: number;
	orders: { agentCode: string; route: Extract<Route, 'iv' | 'po'>; renallyAdjusted: boolean }[];
};

/** Scenario mix of the seeded wards: index → scenario, so the demo always shows each kind of patient. */
const SEED_MIX: Scenario[] = [
	'stable',
	'aki',
	'stable',
	'sepsis',
	'obese',
	'stable',
	'aki',
	'ckd',
	'stable',
	'arc',
	'stable',
	'aki',
	'sepsis',
	'stable',
	'obese',
	'ckd',
	'stable',
	'aki',
	'stable',
	'arc'
];

const WARD_FOR: Record<Scenario, WardName[]> = {
	stable: ['3 North Medicine', '4 West Respiratory', '2 East Orthopaedics', '5 South Surgery'],
	aki: ['3 North Medicine', 'Renal Unit', '5 South Surgery', 'ICU'],
	arc: ['ICU', '5 South Surgery', '2 East Orthopaedics'],
	sepsis: ['ICU', '3 North Medicine', '4 West Respiratory'],
	obese: ['5 South Surgery', '3 North Medicine', '2 East Orthopaedics'],
	ckd: ['Renal Unit', '3 North Medicine']
};

/** Anti-infectives a prescriber at Larkspur Bay would choose for each kind of patient (ATC codes). */
const AGENTS_FOR: Record<Scenario, string[][]> = {
	stable: [['J01DD04'], ['J01CF05'], ['J01MA02'], ['J01MA12'], ['J01XX08'], ['J01XA02'], ['J02AC01'], ['J05AB01'], ['J01DB04'], ['J01GB06'], ['J01EE01']],
	aki: [['J01CR05', 'J01XA01'], ['J01GB03'], ['J01DE01'], ['J01DH02'], ['J05AB01'], ['J01EE01'], ['J01XA01'], ['J01CR05']],
	arc: [['J01DB04'], ['J01XA01', 'J01DE01'], ['J01CR05'], ['J01DH02']],
	sepsis: [
		['J01DH02', 'J01XA01'],
		['J01CR05', 'J01XA01'],
		['J01XB01', 'J01DH02'],
		['J01GB01', 'J01CR05']
	],
	obese: [['J01DB04'], ['J01XA01'], ['J01XX09'], ['J01DD04'], ['J01GB03']],
	ckd: [['J01DE01'], ['J01DH02'], ['J01DH03'], ['J01MA12'], ['J02AC01'], ['J01EE01'], ['J01XA01']]
};
/** Agents also given by mouth at Larkspur Bay. */
const ORAL_OK = new Set(['J01MA02', 'J01MA12', 'J01EE01', 'J02AC01', 'J01XX08']);

function mrnFor(key: number): string {
	return `LBH${String(2_000_000 + (key % 7_000_000)).padStart(7, '0')}`;
}

/** The plan of a patient from its id; seeded ids (lbh-p-0001) follow the ward mix, others a hash. */
export function planFor(sourceId: string): PatientPlan {
	const rng = mulberry32(hashString(`larkspur-bay:${sourceId}`));
	const seeded = /^lbh-p-(\d+)$/.exec(sourceId);
	const index = seeded ? Number(seeded[1]) : null;
	const scenario: Scenario =
		index !== null ? SEED_MIX[index % SEED_MIX.length] : pick(rng, ['stable', 'stable', 'stable', 'aki', 'aki', 'sepsis', 'obese', 'ckd', 'arc'] as const);
	const sex: Sex = scenario === 'arc' ? (rng() < 0.8 ? 'male' : 'female') : rng() < 0.5 ? 'female' : 'male';
	const ageYears = Math.round(
		scenario === 'arc' ? between(rng, 19, 34) : scenario === 'ckd' ? between(rng, 52, 88) : scenario === 'sepsis' ? between(rng, 45, 86) : between(rng, 28, 92)
	);
	const heightCm = round(sex === 'female' ? normalish(rng, 163, 6.5, 148, 182) : normalish(rng, 177, 7, 158, 198), 0);
	const bmi = scenario === 'obese' ? between(rng, 38, 52) : scenario === 'arc' ? between(rng, 21, 28) : normalish(rng, 25, 3.5, 17.5, 33);
	const weightKg = round((bmi * heightCm * heightCm) / 10_000, 1);
	const baselineCreatinineMgDl = round(
		scenario === 'ckd'
			? between(rng, 2.3, 4.1)
			: scenario === 'arc'
				? between(rng, 0.42, 0.58)
				: sex === 'female'
					? between(rng, 0.6, 0.95)
					: between(rng, 0.75, 1.15),
		2
	);
	const baselineAlbuminGL = round(scenario === 'sepsis' ? between(rng, 33, 38) : scenario === 'ckd' ? between(rng, 30, 37) : between(rng, 35, 44), 0);
	const aki =
		scenario === 'aki'
			? { onsetDay: between(rng, 0.8, 4.5), riseDays: between(rng, 1.5, 3), peakRatio: between(rng, 2.1, 3.4), recoveryTauDays: between(rng, 1.5, 3.5) }
			: null;
	const albuminFall = scenario === 'sepsis' ? { perDayGL: between(rng, 1.8, 3.2), floorGL: between(rng, 17, 23) } : null;
	const given = sex === 'female' ? pick(rng, GIVEN_FEMALE) : pick(rng, GIVEN_MALE);
	const family = pick(rng, FAMILY);
	const ward = pick(rng, WARD_FOR[scenario]);
	const admittedDaysAgo = round(index !== null ? 0.6 + ((index * 37) % 97) / 10 : 0, 2);
	const losDays = round(index !== null ? admittedDaysAgo + between(rng, 1.5, 9) : between(rng, 3, 14), 2);
	const regimen = pick(rng, AGENTS_FOR[scenario]);
	const wantsSecond = index !== null ? index % 8 === 0 && regimen.length === 1 : rng() < 0.2 && regimen.length === 1;
	const codes = wantsSecond
		? [
				...regimen,
				pick(
					rng,
					AGENTS_FOR.stable.map((r) => r[0]).filter((c) => c !== regimen[0])
				)
			]
		: regimen;
	return {
		sourceId,
		mrn: mrnFor(index !== null ? 1_000 + index * 7_919 : hashString(sourceId)),
		givenName: given,
		familyName: family,
		sex,
		ageYears,
		scenario,
		ward,
		heightCm,
		weightKg,
		baselineCreatinineMgDl,
		baselineAlbuminGL,
		aki,
		albuminFall,
		labUnits: (index ?? hashString(sourceId)) % 7 === 3 ? 'conventional' : 'si',
		bodyUnits: (index ?? hashString(sourceId)) % 11 === 5 ? 'imperial' : 'metric',
		losDays,
		admittedDaysAgo,
		orders: codes.map((agentCode) => ({
			agentCode,
			route: ORAL_OK.has(agentCode) && rng() < 0.5 ? 'po' : 'iv',
			renallyAdjusted: scenario === 'ckd' ? rng() < 0.5 : scenario === 'aki' ? rng() < 0.2 : false
		}))
	};
}

/** Small deterministic noise for a measurement, ±fraction. */
function noise(key: string, fraction: number): number {
	return 1 + (mulberry32(hashString(key))() * 2 - 1) * fraction;
}

/** Creatinine (mg/dL) of a planned patient `days` after admission. */
export function creatinineAt(plan: PatientPlan, days: number, key = ''): number {
	const base = plan.baselineCreatinineMgDl;
	let value = base;
	if (plan.aki) {
		const { onsetDay, riseDays, peakRatio, recoveryTauDays } = plan.aki;
		if (days >= onsetDay && days < onsetDay + riseDays) value = base * (1 + ((peakRatio - 1) * (days - onsetDay)) / riseDays);
		else if (days >= onsetDay + riseDays) value = base * (1 + (peakRatio - 1) * Math.exp(-(days - onsetDay - riseDays) / recoveryTauDays));
	} else if (plan.scenario === 'sepsis') {
		value = base * (1 + 0.35 * Math.exp(-((days - 2) ** 2) / 2));
	}
	return round(value * noise(`${plan.sourceId}:cr:${key}`, 0.04), 2);
}

/** Albumin (g/L) of a planned patient `days` after admission. */
export function albuminAt(plan: PatientPlan, days: number, key = ''): number {
	let value = plan.baselineAlbuminGL;
	if (plan.albuminFall) value = Math.max(plan.albuminFall.floorGL, value - plan.albuminFall.perDayGL * days);
	return round(value * noise(`${plan.sourceId}:alb:${key}`, 0.03), 0);
}

// ── Agents and staff ──────────────────────────────────────────────────────────────────────────────
type FixtureAgent = AgentParams & { rxnormCode: string | null; synonyms: string[]; agentClass: string; provenance: Record<string, string> };

export function fixtureAgents(): FixtureAgent[] {
	return (agentsFixture as unknown as { agents: FixtureAgent[] }).agents;
}

type Physician = { email: string; displayName: string };
export function demoPhysicians(): Physician[] {
	return demoUsersFixture.users.filter((u) => u.role === 'physician').map(({ email, displayName }) => ({ email, displayName }));
}

/** A prescriber in the hospital's directory, sent to Ebbline as a FHIR Practitioner and PractitionerRole. */
export type DemoPrescriber = {
	practitionerId: string;
	staffId: string;
	givenName: string;
	familyName: string;
	displayName: string;
	/** null for the locum whose only contact is a ward extension ("no e-mail on record") */
	email: string | null;
	phone: string | null;
	specialty: string;
	/** the Ebbline demo sign-in with the same e-mail */
	hasAccount: boolean;
};

export const STAFF_ID_SYSTEM = 'urn:larkspur-bay:staff-id';

/** Invented prescribers without an Ebbline account (recommendations reach them by e-mail). */
const PRESCRIBERS_WITHOUT_ACCOUNT: [given: string, family: string, specialty: string][] = [
	['Ottoline', 'Brisk', 'Infectious diseases'],
	['Maximilian', 'Seagrove', 'Intensive care medicine'],
	['Yewande', 'Farrier', 'Nephrology'],
	['Lucan', 'Thornbury', 'General surgery'],
	['Isolde', 'Marchbank', 'Respiratory medicine'],
	['Teodor', 'Halloran-Pike', 'Orthopaedic surgery'],
	['Amara', 'Quilliam', 'General internal medicine'],
	['Benedikt', 'Rowanhill', 'Intensive care medicine'],
	['Clementine', 'Ashby-Vale', 'Nephrology'],
	['Rufus', 'Penmarric', 'General surgery'],
	['Sunniva', 'Ketterwell', 'Respiratory medicine'],
	['Jasper', 'Kilnsey', 'General internal medicine']
];
const SPECIALTY_OF_ACCOUNT = ['Infectious diseases', 'General internal medicine', 'Respiratory medicine'];

/**
 * Larkspur Bay's prescribers: the three demo physician sign-ins, twelve invented colleagues with a
 * .test address and no account, and one locum reachable only by telephone.
 */
export function demoPrescribers(): DemoPrescriber[] {
	const staffId = (n: number) => `LBS-${String(4100 + n * 37).padStart(5, '0')}`;
	const withAccount = demoPhysicians().map((ph, i): DemoPrescriber => {
		const words = ph.displayName.replace(/^Dr\s+/, '').split(' ');
		return {
			practitionerId: `lbh-pr-${String(i + 1).padStart(2, '0')}`,
			staffId: staffId(i + 1),
			givenName: words.slice(0, -1).join(' '),
			familyName: words.at(-1) ?? '',
			displayName: ph.displayName,
			email: ph.email,
			phone: null,
			specialty: SPECIALTY_OF_ACCOUNT[i % SPECIALTY_OF_ACCOUNT.length],
			hasAccount: true
		};
	});
	const colleagues = PRESCRIBERS_WITHOUT_ACCOUNT.map(([given, family, specialty], k): DemoPrescriber => {
		const n = withAccount.length + k + 1;
		return {
			practitionerId: `lbh-pr-${String(n).padStart(2, '0')}`,
			staffId: staffId(n),
			givenName: given,
			familyName: family,
			displayName: `Dr ${given} ${family}`,
			email: `${given}.${family}@larkspur.test`.toLowerCase(),
			phone: null,
			specialty,
			hasAccount: false
		};
	});
	const n = withAccount.length + colleagues.length + 1;
	const locum: DemoPrescriber = {
		practitionerId: `lbh-pr-${String(n).padStart(2, '0')}`,
		staffId: staffId(n),
		givenName: 'Wrenna',
		familyName: 'Calder',
		displayName: 'Dr Wrenna Calder',
		email: null,
		phone: 'ext. 4417',
		specialty: 'General surgery',
		hasAccount: false
	};
	return [...withAccount, ...colleagues, locum];
}

/** The regimen a prescriber would write: the usual one, or the agent's renal band when adjusted. */
export function regimenFor(plan: PatientPlan, agentCode: string, route: Extract<Route, 'iv' | 'po'>, renallyAdjusted: boolean, creatinineMgDl: number) {
	const agent = fixtureAgents().find((a) => a.code === agentCode);
	if (!agent) throw new Error(`demo: agent ${agentCode} is not in fixtures/agents.json`);
	const ibw = (plan.sex === 'female' ? 45.5 : 50) + 2.3 * (plan.heightCm / 2.54 - 60);
	const dosingKg = plan.weightKg < ibw ? plan.weightKg : plan.weightKg <= 1.2 * ibw ? ibw : ibw + 0.4 * (plan.weightKg - ibw);
	let doseMg = agent.usualDoseMg ?? (agent.usualDoseMgPerKg ?? 0) * (agent.vdWeightBasis === 'actual' ? plan.weightKg : dosingKg);
	let intervalH = agent.usualIntervalH;
	if (renallyAdjusted) {
		const crcl = cockcroftGaultRaw(plan.ageYears, plan.sex === 'female', dosingKg, creatinineMgDl);
		const band = findBand(agent.renalBands, crcl);
		if (band && bandHasRegimen(band)) {
			doseMg = bandDoseMg(band, dosingKg) ?? doseMg;
			intervalH = band.intervalH ?? intervalH;
		}
	}
	doseMg = Math.min(roundDoseMg(doseMg), agent.code === 'J01XA01' ? 2500 : 20_000);
	const infusionH = route === 'iv' ? Math.min(agent.usualInfusionH, intervalH) : 0;
	return { agent, doseMg, intervalH, infusionH };
}

// ── FHIR building blocks ──────────────────────────────────────────────────────────────────────────
const iso = (d: Date) => d.toISOString().replace(/\.\d{3}Z$/, 'Z');
const DAY_MS = 86_400_000;
const HOUR_MS = 3_600_000;
const compact = (d: Date) =>
	iso(d)
		.replace(/[-:TZ]/g, '')
		.slice(0, 12);

export type FhirEntry = { fullUrl: string; resource: Record<string, unknown>; request?: { method: string; url: string } };

export function patientEntry(plan: PatientPlan, now: Date): FhirEntry {
	const birth = new Date(now.getTime() - (plan.ageYears + 0.3 + (hashString(plan.sourceId) % 600) / 1000) * 365.25 * DAY_MS);
	return {
		fullUrl: `urn:uuid:${plan.sourceId}`,
		resource: {
			resourceType: 'Patient',
			id: plan.sourceId,
			identifier: [
				{ type: { coding: [{ system: 'http://terminology.hl7.org/CodeSystem/v2-0203', code: 'MR' }] }, system: 'urn:larkspur-bay:mrn', value: plan.mrn }
			],
			name: [{ use: 'official', family: plan.familyName, given: [plan.givenName] }],
			gender: plan.sex,
			birthDate: birth.toISOString().slice(0, 10)
		}
	};
}

export function encounterEntry(plan: PatientPlan, bed: string, admittedAt: Date, dischargedAt: Date | null = null): FhirEntry {
	const id = `lbh-enc-${plan.sourceId.replace(/^lbh-/, '')}`;
	return {
		fullUrl: `urn:uuid:${id}`,
		resource: {
			resourceType: 'Encounter',
			id,
			status: dischargedAt ? 'finished' : 'in-progress',
			subject: { reference: `Patient/${plan.sourceId}` },
			period: { start: iso(admittedAt), ...(dischargedAt ? { end: iso(dischargedAt) } : {}) },
			location: [
				{ location: { display: plan.ward }, physicalType: { coding: [{ code: 'wa' }] } },
				{ location: { display: bed }, physicalType: { coding: [{ code: 'bd' }] } }
			]
		}
	};
}

export const encounterIdFor = (plan: PatientPlan) => `lbh-enc-${plan.sourceId.replace(/^lbh-/, '')}`;

function observation(plan: PatientPlan, loinc: string, display: string, value: number, unit: string, at: Date): FhirEntry {
	const id = `${plan.sourceId}-${loinc}-${compact(at)}`;
	return {
		fullUrl: `urn:uuid:${id}`,
		resource: {
			resourceType: 'Observation',
			id,
			status: 'final',
			code: { coding: [{ system: LOINC_SYSTEM, code: loinc, display }] },
			subject: { reference: `Patient/${plan.sourceId}` },
			effectiveDateTime: iso(at),
			valueQuantity: { value, unit, system: 'http://unitsofmeasure.org', code: unit }
		}
	};
}

/** A creatinine result in the units this patient's laboratory reports. */
export function creatinineEntry(plan: PatientPlan, mgDl: number, at: Date, pointOfCare = false): FhirEntry {
	if (plan.labUnits === 'conventional') return observation(plan, '2160-0', 'Creatinine [Mass/volume] in Serum or Plasma', mgDl, 'mg/dL', at);
	const umol = Math.round(mgDl * 88.4);
	return pointOfCare
		? observation(plan, '77140-2', 'Creatinine [Moles/volume] in Serum, Plasma or Blood', umol, 'umol/L', at)
		: observation(plan, '14682-9', 'Creatinine [Moles/volume] in Serum or Plasma', umol, 'umol/L', at);
}

export function albuminEntry(plan: PatientPlan, gL: number, at: Date): FhirEntry {
	return plan.labUnits === 'conventional'
		? observation(plan, '1751-7', 'Albumin [Mass/volume] in Serum or Plasma', round(gL / 10, 1), 'g/dL', at)
		: observation(plan, '1751-7', 'Albumin [Mass/volume] in Serum or Plasma', gL, 'g/L', at);
}

export function weightEntry(plan: PatientPlan, kg: number, at: Date): FhirEntry {
	return plan.bodyUnits === 'imperial'
		? observation(plan, '29463-7', 'Body weight', round(kg / 0.45359237, 1), '[lb_av]', at)
		: observation(plan, '29463-7', 'Body weight', kg, 'kg', at);
}

export function heightEntry(plan: PatientPlan, at: Date): FhirEntry {
	return plan.bodyUnits === 'imperial'
		? observation(plan, '8302-2', 'Body height', round(plan.heightCm / 2.54, 1), '[in_i]', at)
		: observation(plan, '8302-2', 'Body height', plan.heightCm, 'cm', at);
}

const ROUTE_CODING = {
	iv: { system: SNOMED_SYSTEM, code: '47625008', display: 'Intravenous route' },
	po: { system: SNOMED_SYSTEM, code: '26643006', display: 'Oral route' }
} as const;

export function orderEntry(
	plan: PatientPlan,
	orderId: string,
	agentCode: string,
	route: Extract<Route, 'iv' | 'po'>,
	regimen: { doseMg: number; intervalH: number; infusionH: number },
	startAt: Date,
	prescriber: Physician | DemoPrescriber
): FhirEntry {
	const agent = fixtureAgents().find((a) => a.code === agentCode);
	// a combination product states its dose basis (co-trimoxazole in trimethoprim mg) as a UCUM annotation
	const component = (agent as { combination?: { component: string } | null } | undefined)?.combination?.component;
	const doseUnit = component ? `mg{${component}}` : 'mg';
	return {
		fullUrl: `urn:uuid:${orderId}`,
		resource: {
			resourceType: 'MedicationRequest',
			id: orderId,
			status: 'active',
			intent: 'order',
			medicationCodeableConcept: { coding: [{ system: ATC_SYSTEM, code: agentCode, display: agent?.name }], text: agent?.name },
			subject: { reference: `Patient/${plan.sourceId}` },
			encounter: { reference: `Encounter/${encounterIdFor(plan)}` },
			authoredOn: iso(startAt),
			// a directory prescriber is named by reference (the name comes from the Practitioner)
			requester:
				'practitionerId' in prescriber
					? { reference: `Practitioner/${prescriber.practitionerId}` }
					: { display: prescriber.displayName, identifier: { value: prescriber.email } },
			dosageInstruction: [
				{
					route: { coding: [ROUTE_CODING[route]] },
					timing: {
						repeat: {
							boundsPeriod: { start: iso(startAt) },
							frequency: 1,
							period: regimen.intervalH,
							periodUnit: 'h',
							...(route === 'iv' ? { duration: regimen.infusionH, durationUnit: 'h' } : {})
						}
					},
					doseAndRate: [{ doseQuantity: { value: regimen.doseMg, unit: doseUnit, system: 'http://unitsofmeasure.org', code: doseUnit } }]
				}
			]
		}
	};
}

/** A prescriber as a FHIR Practitioner: staff id, name, work e-mail (or a telephone extension only). */
export function practitionerEntry(p: DemoPrescriber): FhirEntry {
	const telecom = [
		...(p.email ? [{ system: 'email', value: p.email, use: 'work' }] : []),
		...(p.phone ? [{ system: 'phone', value: p.phone, use: 'work' }] : [])
	];
	return {
		fullUrl: `urn:uuid:${p.practitionerId}`,
		resource: {
			resourceType: 'Practitioner',
			id: p.practitionerId,
			active: true,
			identifier: [{ system: STAFF_ID_SYSTEM, value: p.staffId }],
			name: [{ use: 'official', prefix: ['Dr'], given: [p.givenName], family: p.familyName }],
			telecom
		}
	};
}

/** The prescriber's consultant role at Larkspur Bay, with their specialty. */
export function practitionerRoleEntry(p: DemoPrescriber): FhirEntry {
	const id = `${p.practitionerId}-role`;
	return {
		fullUrl: `urn:uuid:${id}`,
		resource: {
			resourceType: 'PractitionerRole',
			id,
			active: true,
			practitioner: { reference: `urn:uuid:${p.practitionerId}` },
			organization: { display: HOSPITAL_NAME },
			code: [{ text: 'Consultant' }],
			specialty: [{ text: p.specialty }]
		}
	};
}

export function stopEntry(orderId: string, patientSourceId: string, at: Date): FhirEntry {
	return {
		fullUrl: `urn:uuid:${orderId}-stop`,
		resource: {
			resourceType: 'MedicationRequest',
			id: orderId,
			status: 'stopped',
			intent: 'order',
			subject: { reference: `Patient/${patientSourceId}` },
			dosageInstruction: [{ timing: { repeat: { boundsPeriod: { end: iso(at) } } } }]
		}
	};
}

/** Some chronic kidney disease patients on the Renal Unit are on thrice-weekly haemodialysis. */
export function onDialysis(plan: PatientPlan): boolean {
	return plan.scenario === 'ckd' && plan.ward === 'Renal Unit' && hashString(`${plan.sourceId}:hd`) % 2 === 0;
}

/** Sessions on Mondays, Wednesdays and Fridays at 08:00 UTC (4 h each) between `from` and `to`. */
export function dialysisSessions(plan: PatientPlan, from: Date, to: Date): Date[] {
	void plan;
	const out: Date[] = [];
	const day0 = Date.UTC(from.getUTCFullYear(), from.getUTCMonth(), from.getUTCDate());
	for (let day = day0; day <= to.getTime(); day += DAY_MS) {
		const weekday = new Date(day).getUTCDay();
		const end = day + 12 * HOUR_MS;
		if ((weekday === 1 || weekday === 3 || weekday === 5) && day + 8 * HOUR_MS >= from.getTime() && end <= to.getTime()) out.push(new Date(day + 8 * HOUR_MS));
	}
	return out;
}

/** A haemodialysis session (SNOMED CT 302497006) as a FHIR Procedure. */
export function dialysisEntry(plan: PatientPlan, start: Date): FhirEntry {
	const id = `${plan.sourceId}-hd-${compact(start)}`;
	return {
		fullUrl: `urn:uuid:${id}`,
		resource: {
			resourceType: 'Procedure',
			id,
			status: 'completed',
			code: { coding: [{ system: SNOMED_SYSTEM, code: '302497006', display: 'Hemodialysis' }] },
			subject: { reference: `Patient/${plan.sourceId}` },
			performedPeriod: { start: iso(start), end: iso(new Date(start.getTime() + 4 * HOUR_MS)) }
		}
	};
}

export function bundle(entries: FhirEntry[]) {
	return { resourceType: 'Bundle' as const, type: 'batch' as const, entry: entries };
}

/** Morning (06:00 UTC ± 40 min) draws each day; ICU patients also have an evening point-of-care sample. */
export function drawTimes(plan: PatientPlan, from: Date, to: Date): { at: Date; pointOfCare: boolean }[] {
	const out: { at: Date; pointOfCare: boolean }[] = [];
	const day0 = Date.UTC(from.getUTCFullYear(), from.getUTCMonth(), from.getUTCDate());
	for (let day = day0; day <= to.getTime(); day += DAY_MS) {
		const jitter = (hashString(`${plan.sourceId}:${day}`) % 80) - 40;
		const slots =
			plan.ward === 'ICU'
				? [
						{ h: 6, poc: false },
						{ h: 18, poc: true }
					]
				: [{ h: 6, poc: false }];
		for (const slot of slots) {
			const at = new Date(day + slot.h * HOUR_MS + jitter * 60_000);
			if (at > from && at <= to) out.push({ at, pointOfCare: slot.poc });
		}
	}
	return out;
}

/**
 * The seeded hospital at `now`: 120 inpatients with their admission, history since admission (at most
 * seven days), and active orders, as FHIR bundles of about thirty patients each.
 */
export function generateHospital(now: Date, patientCount = SEED_PATIENTS) {
	const prescribers = demoPrescribers();
	// each message carries the Practitioners (and their roles) its orders name
	let named = new Set<DemoPrescriber>();
	const bedsUsed = new Map<string, number>();
	const bundles: ReturnType<typeof bundle>[] = [];
	let entries: FhirEntry[] = [];
	let orderCount = 0;
	let resultCount = 0;
	const historyStart = new Date(now.getTime() - 7 * DAY_MS);
	for (let i = 1; i <= patientCount; i++) {
		const plan = planFor(`lbh-p-${String(i).padStart(4, '0')}`);
		const admittedAt = new Date(now.getTime() - plan.admittedDaysAgo * DAY_MS);
		const ward = WARDS.find((w) => w.name === plan.ward) ?? WARDS[0];
		const bedNo = (bedsUsed.get(ward.name) ?? 0) + 1;
		bedsUsed.set(ward.name, bedNo);
		const bed = `${ward.prefix}-${String(bedNo).padStart(2, '0')}`;
		entries.push(patientEntry(plan, now), encounterEntry(plan, bed, admittedAt));
		const since = admittedAt > historyStart ? admittedAt : historyStart;
		// admission measurements an hour after arrival
		const admissionObs = new Date(Math.max(since.getTime(), admittedAt.getTime() + HOUR_MS));
		if (admissionObs <= now) {
			entries.push(heightEntry(plan, admissionObs), weightEntry(plan, plan.weightKg, admissionObs));
			resultCount += 2;
		}
		const days = (at: Date) => (at.getTime() - admittedAt.getTime()) / DAY_MS;
		const draws = drawTimes(plan, since, now);
		if (admittedAt >= historyStart && (draws.length === 0 || draws[0].at.getTime() - admittedAt.getTime() > 12 * HOUR_MS)) {
			// an admission sample, so that every patient has a creatinine and albumin on record
			draws.unshift({ at: new Date(Math.min(now.getTime() - 30 * 60_000, admittedAt.getTime() + 1.5 * HOUR_MS)), pointOfCare: false });
		}
		let mornings = 0;
		for (const d of draws) {
			entries.push(creatinineEntry(plan, creatinineAt(plan, days(d.at), iso(d.at)), d.at, d.pointOfCare));
			resultCount++;
			if (d.pointOfCare) continue;
			// albumin with the first laboratory sample and every other morning; daily in sepsis
			if (mornings === 0 || plan.scenario === 'sepsis' || mornings % 2 === 0) {
				entries.push(albuminEntry(plan, albuminAt(plan, days(d.at), iso(d.at)), d.at));
				resultCount++;
			}
			mornings++;
		}
		if (plan.ward === 'ICU') {
			for (const d of draws.filter((x) => !x.pointOfCare).slice(1)) {
				entries.push(weightEntry(plan, round(plan.weightKg * noise(`${plan.sourceId}:wt:${iso(d.at)}`, 0.02), 1), d.at));
				resultCount++;
			}
		}
		if (onDialysis(plan)) {
			for (const at of dialysisSessions(plan, since, now)) entries.push(dialysisEntry(plan, at));
		}
		plan.orders.forEach((o, k) => {
			// started after admission, within the week of history (so a creatinine at the start is on record)
			const startAt = new Date(Math.min(now.getTime() - 2 * HOUR_MS, since.getTime() + (3 + 9 * k + (hashString(`${plan.sourceId}:${k}`) % 10)) * HOUR_MS));
			const regimen = regimenFor(plan, o.agentCode, o.route, o.renallyAdjusted, creatinineAt(plan, days(startAt)));
			const prescriber = prescribers[hashString(`${plan.sourceId}:rx:${k}`) % prescribers.length];
			named.add(prescriber);
			const sourceId = `lbh-rx-${plan.sourceId.slice(6)}-${k + 1}`;
			entries.push(orderEntry(plan, sourceId, o.agentCode, o.route, regimen, startAt, prescriber));
			const dosed = { sourceId, agentCode: o.agentCode, route: o.route, regimen, startAt, stopAt: null };
			entries.push(...dosingDeliveries(plan, creatinineAt(plan, days(startAt)), dosed, since, now).flatMap((d) => d.entries));
			orderCount++;
		});
		if (i % 30 === 0 || i === patientCount) {
			const directory = prescribers.filter((p) => named.has(p)).flatMap((p) => [practitionerEntry(p), practitionerRoleEntry(p)]);
			bundles.push(bundle([...directory, ...entries]));
			entries = [];
			named = new Set();
		}
	}
	return { bundles, patients: patientCount, orders: orderCount, results: resultCount };
}
