// Regimens as the pages, the e-mails and the exports print them. Pure.
import type { Route } from '../domain/vocabulary';
import { formatNumber, withUnit } from './number';

export const ROUTE_LABELS: Record<Route, string> = { iv: 'IV', po: 'oral', im: 'IM' };

type RegimenLike = { doseMg: number; intervalH: number; infusionH: number };

/** In words, for prescribers: "1250 mg IV every 12 h, infused over 1.5 h". */
export function formatRegimen(r: RegimenLike & { route?: Route }): string {
	const route = r.route ? ` ${ROUTE_LABELS[r.route]}` : '';
	const infusion = r.infusionH > 0 ? `, infused over ${withUnit(r.infusionH, 'h', 2)}` : '';
	return `${withUnit(r.doseMg, 'mg', 1)}${route} every ${withUnit(r.intervalH, 'h', 1)}${infusion}`;
}

/** A loading dose reads as a suggestion to consider at the start of therapy, never as an instruction. */
export function formatLoadingDose(loadingDoseMg: number | null | undefined): string | null {
	return loadingDoseMg ? `consider a loading dose of ${withUnit(loadingDoseMg, 'mg', 1)} as the first dose only` : null;
}

/** A proposed regimen with its loading dose, if any. */
export function formatProposed(r: RegimenLike & { loadingDoseMg: number | null }): string {
	const loading = formatLoadingDose(r.loadingDoseMg);
	return loading ? `${formatRegimen(r)}; ${loading}` : formatRegimen(r);
}

/** Short, for a dense row: "1250 mg q12h · 1.5 h inf.". */
export function shortRegimen(r: RegimenLike): string {
	const infusion = r.infusionH > 0 ? ` · ${withUnit(r.infusionH, 'h', 2)} inf.` : '';
	return `${withUnit(r.doseMg, 'mg', 1)} q${formatNumber(r.intervalH, 1)}h${infusion}`;
}
