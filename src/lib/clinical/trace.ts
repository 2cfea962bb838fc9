// Published sources named in the calculation trace (clinical-reference §2–§4). Kept as constants so that the
// trace costs no string building per assessment.
import type { TraceInput, TraceStep } from './types';

export const SOURCES = {
	devine: 'Devine BJ, Drug Intell Clin Pharm 1974;8:650–655',
	adjustedWeight: 'common practice (adjusted weight factor 0.4)',
	weightChoice: 'common practice (actual < IBW; IBW to 1.2 × IBW; adjusted above)',
	mosteller: 'Mosteller RD, N Engl J Med 1987;317:1098',
	duBois: 'Du Bois D, Du Bois EF, Arch Intern Med 1916;17:863–871',
	creatinineUnits: 'creatinine 113.12 g/mol: 1 mg/dL = 88.4 µmol/L (KDIGO AKI Work Group, Kidney Int Suppl 2012;2:1–138)',
	scrFloor: 'Reichley RM et al., Pharmacotherapy 1995;15:625–630',
	kdigo: 'KDIGO AKI Work Group, Kidney Int Suppl 2012;2:1–138',
	cockcroftGault: 'Cockcroft DW, Gault MH, Nephron 1976;16:31–41',
	ckdEpi2021: 'Inker LA, Eneanya ND, Coresh J et al., N Engl J Med 2021;385:1737–1749',
	// de-indexing for drug dosing in KDIGO CKD guidance is recalled, not confirmed
	deindex: 'common practice (eGFR × BSA / 1.73 for drug dosing; KDIGO CKD guidance)',
	kineticGfr: 'Chen S, J Am Soc Nephrol 2013;24:877–888',
	arc: 'Udy AA, Baptista JP, Lim NL et al., Crit Care Med 2014;42:520–527',
	unboundFraction: 'mass action, single binding class, albumin in excess (textbook)',
	// Øie–Tozer citation details recalled, not confirmed
	albuminModel:
		'Øie S, Tozer TN, J Pharm Sci 1979;68:1203–1205; Ulldemolins M et al., Clin Pharmacokinet 2011;50:99–110; counterpoint: Antibiotics 2023;12:515 (unbound exposure in theory unchanged)',
	matzke: 'Matzke GR et al., Antimicrob Agents Chemother 1984;25:433–437',
	aminoglycoside:
		'k = 0.00293 × CrCl + 0.014: clinical-PK teaching regression, primary source not confirmed; Vd 0.26 L/kg: Bauer LA, Applied Clinical Pharmacokinetics',
	// the Giusti–Hayton, Dettli, Sawchuk–Zaske and Rybak citations are recalled, not confirmed
	giustiHayton: 'Giusti DL, Hayton WL, Drug Intell Clin Pharm 1973;7:382–387; Dettli L, Med Clin North Am 1974;58:977–985',
	oneCompartment: 'one-compartment first-order identities (textbook)',
	sawchukZaske: 'Sawchuk RJ, Zaske DE, J Pharmacokinet Biopharm 1976;4:183–195',
	aucTarget: 'Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864',
	agentLibrary: 'agent library (example parameters; must be reviewed by the institution)',
	commonPractice: 'common practice',
	record: 'patient record'
} as const;

/** Shown beside every proposed regimen (product brief, "Cautions the product must show"). */
export const PROPOSAL_CAUTION =
	'Estimate from population kinetics. Check against the local formulary, product information and the whole patient; defer to local protocols and licensed practice.';

export function step(
	key: string,
	quantity: string,
	value: number | string | boolean | null,
	unit: string,
	formula: string,
	inputs: TraceInput[],
	source: string,
	note?: string
): TraceStep {
	return { key, quantity, value, unit, formula, inputs, source, note };
}

export function input(name: string, value: number | string | boolean | null, unit: string, source?: string): TraceInput {
	return { name, value, unit, source };
}
