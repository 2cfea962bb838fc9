import { error } from '@sveltejs/kit';
import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { failForm, parseForm } from '$lib/server/http';
import { formatDateTime } from '$lib/server/recommendations';
import { retention, undeliverable } from '$lib/server/mail';
import * as settings from '$lib/server/settings';
import { phoneAnswerSchema, resendSchema } from '$lib/validation/recommendation-loop';
import type { Actions, PageServerLoad } from './$types';

const KIND_LABELS: Record<string, string> = {
	recommendation: 'Recommendation',
	reminder: 'Reminder',
	digest: 'Morning digest',
	account_setup: 'Account set-up link',
	answer_code: 'Answer link confirmation code'
};
const STATUS_LABELS: Record<string, string> = {
	sent: 'awaiting an answer',
	accepted: 'accepted',
	modified: 'modified',
	declined: 'declined',
	withdrawn: 'withdrawn'
};

export const load: PageServerLoad = async ({ locals, url }) => {
	requirePageRole(locals, url, 'admin');
	const show = (url.searchParams.get('show') ?? 'open') as undeliverable.Show;
	if (show !== 'open' && show !== 'settled') error(400, 'show: choose open or settled.');
	const [rows, open, settled, current] = await Promise.all([undeliverable.list(show), undeliverable.countOpen(), undeliverable.countSettled(), settings.get()]);
	return {
		show,
		retentionDays: current.emailRetentionDays,
		counts: { open, settled },
		emails: rows.map((r) => ({
			id: r.id,
			to: r.to,
			subject: r.subject,
			kind: KIND_LABELS[r.kind ?? ''] ?? 'E-mail',
			failed: formatDateTime(r.failedAt),
			queued: formatDateTime(r.createdAt),
			attempts: r.attempts,
			lastError: r.lastError,
			/** the text itself is never shown here; only whether it is still kept */
			text: r.bodyRemovedAt ? `${retention.removedNote(current.emailRetentionDays)} (${formatDateTime(r.bodyRemovedAt)})` : 'kept (resend uses it)',
			resolution: r.resolution === 'resent' ? 'Resent' : r.resolution === 'answered_by_phone' ? 'Answered by telephone' : null,
			resolved: r.resolvedAt ? `${formatDateTime(r.resolvedAt)}${r.resolvedBy ? ` by ${r.resolvedBy}` : ''}` : null,
			recommendation: r.recommendation
				? {
						flagId: r.recommendation.flagId,
						agentName: r.recommendation.agentName ?? 'agent',
						recipientName: r.recommendation.recipientName,
						status: STATUS_LABELS[r.recommendation.status] ?? r.recommendation.status,
						waiting: r.recommendation.status === 'sent'
					}
				: null,
			patient: r.patient ? `${r.patient.familyName}, ${r.patient.givenName} · MRN ${r.patient.mrn}` : null
		}))
	};
};

const who = (locals: App.Locals) => {
	const user = requireRole(locals, 'admin');
	return { ...user, requestId: locals.requestId ?? null };
};

export const actions: Actions = {
	resend: async ({ locals, request }) => {
		const by = who(locals);
		const form = await parseForm(request, resendSchema);
		if (!form.ok) return form.failure;
		const result = await undeliverable.resend(form.data.id, form.data.to, by);
		if (!result.ok)
			return failForm(result.status === 422 ? 400 : result.status, { [result.field ?? 'form']: result.error }, { ...form.values, action: 'resend' });
		return {
			done: form.data.id,
			message: `Queued again to ${form.data.to}. The new e-mail is delivered in the background; if it fails too, it appears here again.`
		};
	},
	phone: async ({ locals, request }) => {
		const by = who(locals);
		const form = await parseForm(request, phoneAnswerSchema);
		if (!form.ok) return form.failure;
		const result = await undeliverable.answeredByPhone(form.data.id, { outcome: form.data.outcome, note: form.data.note }, by);
		if (!result.ok) return failForm(result.status, { form: result.error }, { ...form.values, action: 'phone' });
		return {
			done: form.data.id,
			message: `The physician’s answer (${form.data.outcome}) is recorded${result.flagClosed ? ' and the flag is closed with it' : ''}; the pharmacist who sent it has been told.`
		};
	}
};
