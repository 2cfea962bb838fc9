import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { agents as agentService } from '$lib/server/agents';
import { actor } from '$lib/server/audit';
import { failForm, parseForm, textFields } from '$lib/server/http';
import { parseAgentForm } from '$lib/validation/agents';
import type { Actions, PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url }) => {
	requirePageRole(locals, url, 'admin');
	const list = await agentService.list();
	const selected = url.searchParams.get('agent');
	return {
		agents: list.map((a) => ({ ...a, updatedAt: a.updatedAt.toISOString() })),
		selectedId: list.some((a) => a.id === selected) ? selected : null
	};
};

export const actions: Actions = {
	save: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const form = await parseForm(request, textFields);
		if (!form.ok) return form.failure;
		const values = form.values;
		const parsed = parseAgentForm(values);
		if (!parsed.ok) return failForm(400, parsed.errors, values);
		try {
			const result = await agentService.update(parsed.data, actor(locals));
			return { saved: parsed.data.id, changed: result.changed, replayOrders: result.replayOrders };
		} catch (error) {
			if (error instanceof agentService.AgentNotFoundError) return failForm(404, { form: error.message }, values);
			throw error;
		}
	}
};
