// Cautions that fit the patient, shown beside the proposal (and in the e-mail) under the general one:
// why this estimate may be less certain than usual, in plain words.
import { DEVINE_MIN_HEIGHT_CM } from './body-size';
import type { BodySize } from './patient-state';
import type { ReferenceRegimen } from './reference-regimen';
import { RRT_LABEL, type RenalState } from './renal-state';
import type { AgentParams, ProposedRegimen, TherapyContext } from './types';

const fmt = (n: number | null) => (n === null ? '—' : n >= 100 ? String(Math.round(n)) : n.toFixed(1));

export function situationalCautions(args: {
	agent: AgentParams;
	therapy: TherapyContext;
	body: BodySize;
	renal: RenalState;
	reference: ReferenceRegimen | null;
	proposed: ProposedRegimen | null;
}): string[] {
	const { agent, therapy, body, renal, reference, proposed } = args;
	const out: string[] = [];
	if (!therapy.systemic) return ['Not absorbed by this route: Ebbline does not assess it as systemic therapy.'];
	if (renal.renalReplacement !== null) {
		out.push(
			`On ${RRT_LABEL[renal.renalReplacement]}: the regimen comes from the library's dialysis regimen, not from a CrCl; ` +
				(renal.renalReplacement === 'crrt'
					? 'it depends on the effluent rate — check the prescribed dose of CRRT.'
					: 'time doses after the session on dialysis days.')
		);
	} else if (!agent.renallyAdjusted) {
		// the dose does not depend on renal function: no renal caution
	} else if (renal.dosingBasis === 'lower-of-cg-and-kinetic-gfr') {
		out.push(
			`Creatinine is changing: this follows the lower of Cockcroft–Gault (${fmt(renal.crclMlMin)} mL/min) and kinetic GFR (${fmt(renal.kineticGfrMlMin)} mL/min); re-check with the next creatinine.`
		);
	} else if (renal.dosingBasis === 'unstable-no-kinetic-gfr') {
		out.push('Creatinine is changing and kinetic GFR could not be computed: Cockcroft–Gault is unreliable until it settles.');
	}
	if (body.heightCm === null && body.weightKg !== null) {
		out.push(
			'No height on record: ideal and adjusted weight are unknown and actual weight was used; in an obese patient CrCl and weight-based doses are over-estimated.'
		);
	} else if (body.heightCm !== null && body.heightCm < DEVINE_MIN_HEIGHT_CM) {
		out.push(`Height below ${DEVINE_MIN_HEIGHT_CM.toFixed(1)} cm: ideal body weight is extrapolated beyond the Devine formula's range (low confidence).`);
	}
	if (body.obese === true) out.push('Weight above the obesity threshold: CrCl uses adjusted body weight; check the weight basis of weight-based doses.');
	if (therapy.route === 'po') out.push(`Oral route: bioavailability ${fmt(therapy.bioavailability * 100)} % assumed, with normal absorption and adherence.`);
	if (reference !== null && reference.indication !== null)
		out.push(`Compared with the "${reference.indication}" regimen because the order's dose matches it: check the indication.`);
	if (reference !== null && reference.reductionDeferred)
		out.push(`Day ${therapy.dayOfTherapy} of therapy: the renal reduction applies from day ${agent.renalAdjustmentFromDay}.`);
	if (reference !== null && reference.levelGuided) out.push('Level-guided at this renal function: dose by measured levels.');
	if (proposed !== null && (agent.model === 'aminoglycoside' || agent.model === 'vancomycin')) out.push('Narrow margin: confirm with measured levels.');
	if (therapy.extendedInfusion) out.push('Extended or continuous infusion: compared by daily dose, infusion kept.');
	if (proposed?.loadingDoseMg) out.push('The loading dose is a suggestion to consider at the start of therapy, not an instruction.');
	return out;
}
