// How recommendations are worded, shared by the pages and the e-mails (numbers and regimens print
// through src/lib/format).
// Pure: relative imports only, no framework or database.
import { SEVERITIES, severityLabel, type Route, type Severity } from '../domain/vocabulary';
import { formatChange, formatNumber, formatProposed, formatRegimen, withUnit } from '../format';
import type { PatientDetail } from '../validation/settings';

export type { Route };

/** The order's regimen at the time a recommendation was sent. */
export type CurrentRegimen = { agentName: string; doseMg: number; intervalH: number; infusionH: number; route: Route };

/** What the pharmacist proposes (or the physician answers with). */
export type Regimen = { doseMg: number; intervalH: number; infusionH: number; loadingDoseMg: number | null; basis?: string | null };

/** The numbers behind a recommendation, copied from the assessment when it is sent. */
export type KeyNumbers = {
	assessedAt: string;
	crclThenMlMin: number | null;
	crclNowMlMin: number | null;
	albuminGL: number | null;
	halfLifeThenH: number | null;
	halfLifeNowH: number | null;
	/** predicted steady-state values of the current regimen */
	troughMgL: number | null;
	auc24MgHL: number | null;
	troughMaxMgL: number | null;
	aucTargetMgHL: [number, number] | null;
	/** the cautions that fitted the patient when it was sent (recommendations sent earlier have none) */
	cautions?: string[];
};

export type KeyNumberRow = { label: string; value: string };

/** The rows of the key-numbers table, in the order a prescriber reads them. */
export function keyNumberRows(k: KeyNumbers): KeyNumberRow[] {
	const rows: KeyNumberRow[] = [
		{ label: 'Creatinine clearance (Cockcroft–Gault), order start → now', value: formatChange(k.crclThenMlMin, k.crclNowMlMin, 'mL/min', 0) },
		{ label: 'Serum albumin, latest', value: withUnit(k.albuminGL, 'g/L', 0) },
		{ label: 'Expected half-life, order start → now', value: formatChange(k.halfLifeThenH, k.halfLifeNowH, 'h', 1) }
	];
	// AUC only for agents dosed to an AUC target (vancomycin in the example library); otherwise the trough
	if (k.auc24MgHL !== null && k.aucTargetMgHL) {
		const target = ` (target ${formatNumber(k.aucTargetMgHL[0])}–${withUnit(k.aucTargetMgHL[1], 'mg·h/L')})`;
		rows.push({ label: 'Predicted AUC24 of the current regimen', value: `${withUnit(k.auc24MgHL, 'mg·h/L', 0)}${target}` });
	}
	if (k.troughMgL !== null) {
		const limit = k.troughMaxMgL !== null ? ` (limit ${withUnit(k.troughMaxMgL, 'mg/L', 1)})` : '';
		rows.push({ label: 'Predicted trough of the current regimen', value: `${withUnit(k.troughMgL, 'mg/L', 1)}${limit}` });
	}
	return rows;
}

export type PatientNames = { givenName: string; familyName: string; mrn: string; ward: string | null };

export function initials(givenName: string, familyName: string): string {
	return [givenName, familyName]
		.map((name) => name.trim().charAt(0).toUpperCase())
		.filter(Boolean)
		.map((c) => `${c}.`)
		.join('');
}

/** How a patient is named outside the app (e-mail, answer page): the setting decides. */
export function patientLabel(p: PatientNames, detail: PatientDetail): string {
	const who = detail === 'full_name' ? `${p.givenName} ${p.familyName}` : initials(p.givenName, p.familyName);
	return [who, `MRN ${p.mrn}`, p.ward ?? 'ward not recorded'].join(' · ');
}

/** A finding as a recommendation lists it (kept with the recommendation as it was when sent). */
export type RecommendedFinding = { ruleKey: string; ruleTitle: string; severity: Severity; text: string };

/**
 * The pre-filled message: every finding of the flag, the numbers behind them and the suggested change,
 * in plain words.
 */
export function draftMessage(input: { findings: string[]; current: CurrentRegimen; proposed: Regimen | null; keyNumbers: KeyNumbers }): string {
	const { findings, current, proposed, keyNumbers: k } = input;
	const facts = [
		k.crclNowMlMin !== null ? `estimated CrCl ${formatChange(k.crclThenMlMin, k.crclNowMlMin, 'mL/min', 0)}` : null,
		k.albuminGL !== null ? `albumin ${withUnit(k.albuminGL, 'g/L', 0)}` : null,
		k.halfLifeNowH !== null ? `expected half-life ${formatChange(k.halfLifeThenH, k.halfLifeNowH, 'h', 1)}` : null
	].filter(Boolean);
	const lines = findings.length > 1 ? [`Findings:\n${findings.map((f) => `- ${f.trim()}`).join('\n')}`] : findings.map((f) => f.trim());
	if (facts.length) lines.push(`Since the order started: ${facts.join('; ')}.`);
	lines.push(
		proposed
			? `Suggest changing ${current.agentName} from ${formatRegimen(current)} to ${formatProposed(proposed)}.`
			: `Please review ${current.agentName} ${formatRegimen(current)}; no regimen is proposed for this renal function, so a level-guided or alternative approach may be needed.`
	);
	return lines.join('\n\n');
}

/** Priority is never shown by colour alone: a shape and the word. */
export const SEVERITY_TEXT = Object.fromEntries(SEVERITIES.map((s) => [s, severityLabel(s)])) as Record<Severity, string>;

export const RESPONSE_LABELS = {
	sent: 'Awaiting answer',
	accepted: 'Accepted',
	modified: 'Modified',
	declined: 'Declined',
	withdrawn: 'Withdrawn'
} as const;
export type RecommendationStatus = keyof typeof RESPONSE_LABELS;
