import { error } from '@sveltejs/kit';
import { asc } from 'drizzle-orm';
import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { actor } from '$lib/server/audit';
import { getDb } from '$lib/server/db';
import { agents } from '$lib/server/db/schema';
import { quarantine } from '$lib/server/feed';
import { failForm, parseForm, jsonTooDeep, MAX_JSON_DEPTH } from '$lib/server/http';
import { quarantineDiscardSchema, quarantineMapAgentSchema, quarantineReprocessSchema } from '$lib/validation/feed';
import type { Actions, PageServerLoad } from './$types';

const PAGE_SIZE = 25;
const STATUSES = ['open', 'reprocessed', 'discarded'] as const;

export const load: PageServerLoad = async ({ locals, url }) => {
	requirePageRole(locals, url, 'admin');
	const status = (url.searchParams.get('status') ?? 'open') as quarantine.QuarantineStatus;
	if (!STATUSES.includes(status)) error(400, 'status: choose open, reprocessed or discarded.');
	const page = Math.max(1, Number(url.searchParams.get('page')) || 1);
	const [{ rows, total }, counts, library] = await Promise.all([
		quarantine.list({ status, limit: PAGE_SIZE, offset: (page - 1) * PAGE_SIZE }),
		quarantine.counts(),
		getDb().select({ id: agents.id, name: agents.name, code: agents.code }).from(agents).orderBy(asc(agents.name))
	]);
	return {
		status,
		page,
		pages: Math.max(1, Math.ceil(total / PAGE_SIZE)),
		counts,
		agents: library,
		entries: rows.map((r) => ({
			id: r.id,
			source: r.source,
			entryIndex: r.entryIndex,
			resourceType: r.resourceType,
			reason: r.reason,
			field: r.field,
			status: r.status,
			decisionNote: r.decisionNote,
			decidedAt: r.decidedAt,
			createdAt: r.createdAt,
			format: r.raw.format,
			csvKind: r.raw.format === 'csv' ? r.raw.kind : null,
			content: JSON.stringify(r.raw.format === 'fhir' ? r.raw.resource : r.raw.values, null, 2),
			unknownAgent: /unknown agent|ambiguous agent/.test(r.reason) ? quarantine.unknownAgentName(r.raw) : null
		}))
	};
};

function problem(err: unknown) {
	if (err instanceof quarantine.QuarantineError) return failForm(400, { [err.field]: err.message });
	throw err;
}

export const actions: Actions = {
	reprocess: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const form = await parseForm(request, quarantineReprocessSchema);
		if (!form.ok) return form.failure;
		let content: unknown;
		if (form.data.raw !== undefined && form.data.raw.trim() !== '') {
			if (jsonTooDeep(form.data.raw))
				return failForm(400, { raw: `The corrected entry is nested deeper than ${MAX_JSON_DEPTH} levels.` }, { id: form.data.id, raw: form.data.raw });
			try {
				content = JSON.parse(form.data.raw);
			} catch (e) {
				return failForm(400, { raw: `The corrected entry is not valid JSON: ${(e as Error).message}` }, { id: form.data.id, raw: form.data.raw });
			}
		}
		try {
			const result = await quarantine.reprocess(form.data.id, actor(locals), content);
			if (!result.ok) return failForm(400, { raw: `Still not accepted: ${result.reason}` }, { id: form.data.id, raw: form.data.raw ?? '' });
			return { done: form.data.id, message: result.outcome === 'accepted' ? 'Accepted on re-processing.' : 'Already stored; marked as re-processed.' };
		} catch (err) {
			return problem(err);
		}
	},
	mapAgent: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const form = await parseForm(request, quarantineMapAgentSchema);
		if (!form.ok) return form.failure;
		try {
			const result = await quarantine.mapAgentAndReprocess(form.data.id, form.data.agentId, form.data.name, actor(locals));
			if (!result.ok) return failForm(400, { raw: `The name is now mapped, but the entry is still not accepted: ${result.reason}` }, { id: form.data.id });
			return { done: form.data.id, message: `“${form.data.name}” now maps to the chosen agent; the entry was accepted.` };
		} catch (err) {
			return problem(err);
		}
	},
	discard: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const form = await parseForm(request, quarantineDiscardSchema);
		if (!form.ok) return form.failure;
		try {
			await quarantine.discard(form.data.id, form.data.reason, actor(locals));
			return { done: form.data.id, message: 'Discarded; the reason is in the audit log.' };
		} catch (err) {
			return problem(err);
		}
	}
};
