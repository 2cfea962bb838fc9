import { requirePageRole, requireRole } from '$lib/server/auth/access';
import { actor } from '$lib/server/audit';
import { failForm, parseForm, textFields } from '$lib/server/http';
import { ruleSets as rules } from '$lib/server/rules';
import { FACTS_SCHEMA, FACT_NAMES } from '$lib/rules/facts';
import { paramSpec } from '$lib/rules/params';
import { displayUnit, publishSchema, ruleSetFromForm, toInputValue } from '$lib/validation/rules';
import { z } from 'zod';
import type { Actions, PageServerLoad } from './$types';

export const load: PageServerLoad = async ({ locals, url }) => {
	requirePageRole(locals, url, 'admin');
	const [{ active, draft }, versions, hits] = await Promise.all([rules.workingVersion(), rules.versionsWithDiffs(), rules.hitCounts()]);
	const editing = draft ?? { id: active.id, version: active.version, rules: active.rules };
	const activeSummary = versions.find((v) => v.id === active.id);
	return {
		active: { id: active.id, version: active.version, publishedAt: activeSummary?.publishedAt ?? null, publishedBy: activeSummary?.publishedBy ?? null },
		editing: { id: editing.id, version: editing.version, isDraft: draft !== null },
		rules: editing.rules.map((r) => ({
			key: r.key,
			title: r.title,
			description: r.description,
			enabled: r.enabled,
			severity: r.severity,
			finding: r.finding,
			suggestedAction: r.suggestedAction,
			logic: JSON.stringify(r.when, null, 2),
			escalation: r.escalation ? `${JSON.stringify(r.escalation.when)} → ${r.escalation.severity}` : null,
			requires: r.requires,
			hits: hits[r.key] ?? { days7: 0, days30: 0 },
			params: Object.entries(r.params).map(([name, value]) => {
				const spec = paramSpec(name);
				const unit = spec?.unit ?? '';
				const scale = unit === 'fraction' ? 100 : 1;
				return {
					name,
					label: spec?.label ?? name,
					unit: displayUnit(unit),
					value: toInputValue(value, unit),
					min: spec ? toInputValue(spec.min, unit) : '',
					max: spec ? toInputValue(spec.max, unit) : '',
					step: spec ? String(Math.round(spec.step * scale * 1e6) / 1e6) : 'any',
					defaultValue: spec ? toInputValue(spec.defaultValue, unit) : '',
					source: spec?.source ?? ''
				};
			})
		})),
		versions: versions.map((v) => ({ ...v, createdAt: v.createdAt.toISOString(), publishedAt: v.publishedAt?.toISOString() ?? null })),
		facts: FACT_NAMES.map((name) => ({ name, unit: FACTS_SCHEMA[name].unit, meaning: FACTS_SCHEMA[name].meaning }))
	};
};

const versionIdSchema = z.object({
	versionId: z.uuid('Choose a version.'),
	expectedActiveId: z.uuid('Reload the page: the active version is unknown.')
});

function conflictOrThrow(error: unknown) {
	if (error instanceof rules.PublishConflictError) return failForm(409, { form: error.message });
	if (error instanceof rules.RuleVersionNotFoundError) return failForm(404, { form: error.message });
	if (error instanceof rules.RuleValidationError) return failForm(400, { form: error.message });
	throw error;
}

export const actions: Actions = {
	save: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const form = await parseForm(request, textFields);
		if (!form.ok) return form.failure;
		const values = form.values;
		const base = await rules.getVersion(values.basedOn ?? '').catch(() => undefined);
		if (!base) return failForm(400, { form: 'The version you edited no longer exists; reload the page.' }, values);
		const parsed = ruleSetFromForm(values, base.rules);
		if (!parsed.ok) return failForm(400, parsed.errors, values);
		const saved = await rules.saveDraft(parsed.rules, { basedOn: parsed.basedOn, note: parsed.note }, actor(locals));
		return { saved: saved.version, savedId: saved.id };
	},
	publish: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const parsed = await parseForm(request, publishSchema);
		if (!parsed.ok) return parsed.failure;
		try {
			const result = await rules.publish(parsed.data.versionId, actor(locals), { expectedActiveId: parsed.data.expectedActiveId });
			return { published: result.version, replayJobId: result.replayJobId };
		} catch (error) {
			return conflictOrThrow(error);
		}
	},
	rollBack: async ({ locals, request }) => {
		requireRole(locals, 'admin');
		const parsed = await parseForm(request, versionIdSchema);
		if (!parsed.ok) return parsed.failure;
		try {
			const result = await rules.rollBack(parsed.data.versionId, actor(locals), { expectedActiveId: parsed.data.expectedActiveId });
			return { published: result.version, restored: result.restoredVersion, replayJobId: result.replayJobId };
		} catch (error) {
			return conflictOrThrow(error);
		}
	}
};
