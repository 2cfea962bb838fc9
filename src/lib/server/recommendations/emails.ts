// The e-mails of the recommendation loop: the recommendation itself (with its one-use answer link) and
// the reminders (which carry no link).
import { PROPOSAL_CAUTION } from '../../clinical/trace';
import { keyNumberRows, SEVERITY_TEXT, type CurrentRegimen, type KeyNumbers, type RecommendedFinding, type Regimen } from '../../recommendations/format';
import { formatDateTimeZoned, formatProposed, formatRegimen } from '../../format';
import { config } from '../config';
import { renderEmail, type EmailBlock } from '../mail';

export const formatDateTime = (at: Date, timeZone = config.hospitalTimeZone) => formatDateTimeZoned(at, timeZone);

export function recommendationEmail(input: {
	link: string;
	expiresAt: Date;
	patient: string;
	findings: RecommendedFinding[];
	current: CurrentRegimen;
	proposed: Regimen;
	keyNumbers: KeyNumbers;
	/** cautions that fit this patient (from the assessment), under the general one */
	cautions: string[];
	message: string;
	pharmacist: { name: string; email: string };
}) {
	const blocks: EmailBlock[] = [
		{
			kind: 'paragraph',
			text: `${input.pharmacist.name}, stewardship pharmacist, suggests a dose change for your patient. Please accept, modify or decline it.`
		},
		{
			kind: 'facts',
			rows: [
				{ label: 'Patient', value: input.patient },
				{ label: 'Current order', value: `${input.current.agentName} ${formatRegimen(input.current)}` }
			]
		},
		{ kind: 'heading', text: input.findings.length === 1 ? 'Finding' : `Findings (${input.findings.length})` },
		{ kind: 'list', items: input.findings.map((f) => `${SEVERITY_TEXT[f.severity]} · ${f.ruleTitle}: ${f.text}`) },
		{ kind: 'heading', text: 'Proposed regimen' },
		{ kind: 'paragraph', text: `${input.current.agentName} ${formatProposed(input.proposed)}` },
		{ kind: 'caution', text: PROPOSAL_CAUTION },
		...input.cautions.map((text): EmailBlock => ({ kind: 'caution', text })),
		{ kind: 'heading', text: 'Key numbers' },
		{ kind: 'facts', rows: keyNumberRows(input.keyNumbers) },
		{ kind: 'quote', by: `Message from ${input.pharmacist.name} (${input.pharmacist.email})`, text: input.message },
		{ kind: 'button', href: input.link, label: 'Answer the recommendation' },
		{
			kind: 'paragraph',
			muted: true,
			text: `The link works once, needs no sign-in and expires on ${formatDateTime(input.expiresAt)}. Anyone holding it can answer, so please do not forward this e-mail. You can also answer after signing in to Ebbline, under My recommendations.`
		}
	];
	return {
		subject: `Dose recommendation for ${input.current.agentName}: please answer`,
		...renderEmail({
			title: `Dose recommendation: ${input.current.agentName}`,
			preheader: `Proposed: ${formatProposed(input.proposed)}`,
			blocks,
			footer:
				'Sent by Ebbline for the antimicrobial stewardship team. Decision support for qualified clinicians; the prescriber remains responsible for the prescription.'
		})
	};
}

/**
 * The code that opens an answer link's second step. It names neither the patient nor the drug: the
 * code alone is worth nothing without the link, and the link alone shows no patient.
 */
export function answerCodeEmail(code: string, lifetimeMin: number) {
	return {
		subject: 'Your Ebbline confirmation code',
		...renderEmail({
			title: 'Confirmation code',
			preheader: `Your code works for ${lifetimeMin} minutes.`,
			blocks: [
				{ kind: 'paragraph', text: 'Someone opened the answer link of a dose recommendation sent to you and asked to see the patient and answer.' },
				{ kind: 'facts', rows: [{ label: 'Confirmation code', value: code }] },
				{
					kind: 'paragraph',
					text: `Enter it on the page that asked for it. It works once, for ${lifetimeMin} minutes. If you did not ask for it, ignore this e-mail: without the code nothing about the patient is shown.`
				}
			],
			footer: 'Sent by Ebbline for the antimicrobial stewardship team. Never give this code to anyone, including the stewardship team.'
		})
	};
}

/** A recommendation due a reminder, as the reminder query reads it. */
export type Due = {
	id: string;
	flag_id: string;
	pharmacist_id: string;
	pharmacist_name: string;
	to_address: string;
	to_name: string;
	reminder_count: number;
	created_at: Date;
	token_expires_at: Date;
	current: CurrentRegimen;
	proposed: Regimen;
	given_name: string;
	family_name: string;
	mrn: string;
	ward: string | null;
};

export const toDate = (v: unknown) => (v instanceof Date ? v : new Date(v as string));

/** A reminder; the `final` one says that no other will follow. */
export function reminderEmail(row: Due, patient: string, final: boolean) {
	const current = row.current;
	const base = config.appUrl.replace(/\/$/, '');
	const blocks: EmailBlock[] = [
		{
			kind: 'paragraph',
			text: `On ${formatDateTime(toDate(row.created_at))} ${row.pharmacist_name} sent you a dose recommendation that has not been answered yet.`
		},
		{
			kind: 'facts',
			rows: [
				{ label: 'Patient', value: patient },
				{ label: 'Current order', value: `${current.agentName} ${formatRegimen(current)}` },
				{ label: 'Proposed', value: `${current.agentName} ${formatProposed(row.proposed)}` }
			]
		},
		{ kind: 'caution', text: PROPOSAL_CAUTION },
		{
			kind: 'paragraph',
			text: `The answer link in the first e-mail works until ${formatDateTime(toDate(row.token_expires_at))}. For your safety this reminder carries no answer link; you can also sign in and answer under My recommendations.`
		},
		{ kind: 'button', href: `${base}/recommendations`, label: 'Open My recommendations' }
	];
	return {
		subject: `${final ? 'Second reminder' : 'Reminder'}: dose recommendation for ${current.agentName} awaits your answer`,
		...renderEmail({
			title: `${final ? 'Second reminder' : 'Reminder'}: ${current.agentName} recommendation`,
			preheader: 'A stewardship recommendation is waiting for your answer.',
			blocks,
			footer: final
				? 'Sent by Ebbline for the antimicrobial stewardship team. This is the last reminder; if it stays unanswered, the pharmacist who sent it is told and may call you.'
				: 'Sent by Ebbline for the antimicrobial stewardship team. You receive at most two reminders per recommendation.'
		})
	};
}
