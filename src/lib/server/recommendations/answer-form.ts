import { z } from 'zod';
import { acceptSchema, declineSchema, modifySchema, type Answer } from '../../validation/recommendations';
import { parseForm } from '../http';

const withId = { id: z.uuid('Unknown recommendation.').optional() };
const SCHEMAS = {
	accept: acceptSchema.extend(withId),
	modify: z.intersection(modifySchema, z.object(withId)),
	decline: declineSchema.extend(withId)
};

/** Reads one of the three answers from a form; on failure the fail(400) naming the field at fault. */
export async function readAnswer(request: Request, kind: keyof typeof SCHEMAS) {
	const form = await parseForm(request, SCHEMAS[kind]);
	if (!form.ok) return form;
	const data = form.data as Record<string, unknown> & { id?: string };
	let answer: Answer;
	if (kind === 'accept') answer = { outcome: 'accepted' };
	else if (kind === 'decline') answer = { outcome: 'declined', reason: data.reason as string };
	else {
		const { doseMg, intervalH, infusionH, loadingDoseMg, note } = data as z.infer<typeof modifySchema>;
		answer = { outcome: 'modified', regimen: { doseMg, intervalH, infusionH, loadingDoseMg }, note };
	}
	return { ok: true as const, answer, id: data.id ?? null, values: form.values };
}
