// The pages' one way to act on a flag: POST /api/v1/flags/[id]/events with the version they loaded.
import type { FlagEventBody } from '../validation/flags';
import type { FlagActionKind } from './board';

export type ActedFlag = {
	id: string;
	version: number;
	state: string;
	outcome: string | null;
	assignee: { id: string; name: string } | null;
	availableActions: FlagActionKind[];
};

export type ActOutcome =
	{ ok: true; flag: ActedFlag } | { ok: false; status: number; error: string; conflict?: { version: number; by: string | null; what: string; at: string } };

export async function sendFlagEvent(flagId: string, body: FlagEventBody, fetcher: typeof fetch = fetch): Promise<ActOutcome> {
	let response: Response;
	try {
		response = await fetcher(`/api/v1/flags/${flagId}/events`, {
			method: 'POST',
			headers: { 'content-type': 'application/json' },
			body: JSON.stringify(body)
		});
	} catch {
		return { ok: false, status: 0, error: 'Ebbline could not be reached. Check the connection and try again; nothing was changed.' };
	}
	const payload = await response.json().catch(() => ({ error: `The server answered ${response.status}.` }));
	if (response.ok) return { ok: true, flag: payload.flag };
	return { ok: false, status: response.status, error: payload.error ?? `The server answered ${response.status}.`, conflict: payload.conflict };
}
