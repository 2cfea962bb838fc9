// Storing the prescriber directory the feed sends (Practitioner, PractitionerRole) and resolving each
// order's requester to a prescriber.
import { prescribers as directory } from '../prescribers';
import type { Tx } from '../db';
import type { OrderRecord, PractitionerRecord, PractitionerRoleRecord, PrescriberRef } from './types';

import { lastPerKey, latestPerKey, type Hooks } from './store-common';

export type PrescriberOfEntry = Map<number, string>;

/**
 * Practitioners into the directory, one at a time (a message names a few dozen): entries of one
 * Practitioner after the first are duplicates of it; an identifier that names another prescriber on
 * record quarantines the entry.
 */
export async function savePractitioners(tx: Tx, list: PractitionerRecord[], hooks: Hooks): Promise<PrescriberOfEntry> {
	const prescriberOfEntry: PrescriberOfEntry = new Map();
	if (list.length === 0) return prescriberOfEntry;
	const latest = lastPerKey(list, (r) => r.key);
	const idOfKey = new Map<string, string>();
	// the same order of keys in every transaction keeps concurrent messages from deadlocking
	for (const r of [...latest.values()].sort((a, b) => (a.key < b.key ? -1 : a.key > b.key ? 1 : 0))) {
		const saved = await directory.saveFromFeed(tx, {
			name: r.name,
			named: r.named,
			identifiers: r.identifiers,
			email: r.email,
			emailProblem: r.emailProblem
		});
		if (!saved.ok) {
			hooks.reject(r, saved.field, saved.reason);
			continue;
		}
		idOfKey.set(r.key, saved.id);
		// a missing e-mail is said once: stored without one, or the address on record kept
		const emailNote =
			saved.notes.length || !r.emailProblem ? [] : [`telecom: no usable e-mail (${r.emailProblem}); the prescriber is stored with no e-mail on record`];
		const notes = [...emailNote, ...r.notes, ...saved.notes];
		if (saved.change === 'unchanged') hooks.setOutcome(r, 'duplicate', undefined, notes);
		else hooks.setOutcome(r, 'accepted', saved.change === 'created' ? 'created' : 'updated', notes);
	}
	for (const r of list) {
		const id = idOfKey.get(r.key);
		if (id) prescriberOfEntry.set(r.index, id);
		if (latest.get(r.key) !== r && id) hooks.setOutcome(r, 'duplicate');
		else if (latest.get(r.key) !== r) hooks.reject(r, 'id', `${r.key} was quarantined in this message (a later entry of the same Practitioner)`);
	}
	await directory.linkAccounts(tx, [...idOfKey.values()]);
	return prescriberOfEntry;
}

/** The prescriber a reference names: in this message, on record, or (an e-mail) added to the directory. */
export async function resolvePrescriber(
	tx: Tx,
	ref: PrescriberRef,
	prescriberOfEntry: PrescriberOfEntry,
	options: { createByEmail: boolean }
): Promise<{ id: string; created?: boolean } | { problem: string }> {
	if (ref.kind === 'entry') {
		const id = prescriberOfEntry.get(ref.index);
		return id ? { id } : { problem: `${ref.label} (entry ${ref.index}) was quarantined in this message` };
	}
	if (ref.kind === 'identifier') {
		const id = await directory.findIdByIdentifier(tx, ref.identifier, ref.anySystem);
		return id ? { id } : { problem: `${ref.label} matches no prescriber on record` };
	}
	if (ref.kind === 'role') {
		const id = await directory.findIdByRoleKey(tx, ref.sourceKey);
		return id ? { id } : { problem: `${ref.label} matches no PractitionerRole on record` };
	}
	if (options.createByEmail) return directory.findOrCreateByEmail(tx, ref.email, ref.name);
	const id = await directory.findIdByEmail(tx, ref.email);
	return id ? { id } : { problem: `${ref.label} matches no prescriber on record` };
}

/** PractitionerRoles, by their source key; the practitioner must be in this message or on record. */
export async function saveRoles(tx: Tx, list: PractitionerRoleRecord[], prescriberOfEntry: PrescriberOfEntry, hooks: Hooks) {
	if (list.length === 0) return;
	for (const r of latestPerKey(list, (r) => r.sourceKey, hooks.setOutcome)) {
		const who = await resolvePrescriber(tx, r.practitioner, prescriberOfEntry, { createByEmail: false });
		if ('problem' in who) {
			hooks.reject(r, 'practitioner', `${who.problem}; send the Practitioner first or in the same message`);
			continue;
		}
		const change = await directory.saveRole(tx, who.id, r);
		const notes = [...r.notes];
		if (r.email && r.active !== false && (await directory.useRoleEmail(tx, who.id, r.email))) {
			notes.push(`the prescriber had no e-mail on record: the role's address ${r.email} is used`);
			await directory.linkAccounts(tx, [who.id]);
		}
		if (change === 'unchanged' && notes.length === r.notes.length) hooks.setOutcome(r, 'duplicate', undefined, notes);
		else hooks.setOutcome(r, 'accepted', change === 'created' ? 'created' : 'updated', notes);
	}
}

/** Each order's prescriber in the directory, and a note for a requester that names nobody Ebbline can find. */
export async function resolveOrderPrescribers(tx: Tx, recs: OrderRecord[], prescriberOfEntry: PrescriberOfEntry) {
	const out = new Map<OrderRecord, { practitionerId: string | null; notes: string[] }>();
	const cache = new Map<string, Awaited<ReturnType<typeof resolvePrescriber>>>();
	const created: string[] = [];
	for (const r of recs) {
		if (!r.prescriber) {
			out.set(r, { practitionerId: null, notes: r.notes });
			continue;
		}
		const key = JSON.stringify(r.prescriber.kind === 'email' ? { kind: 'email', email: r.prescriber.email } : r.prescriber);
		let found = cache.get(key);
		if (!found) {
			found = await resolvePrescriber(tx, r.prescriber, prescriberOfEntry, { createByEmail: true });
			cache.set(key, found);
			if ('created' in found && found.created) created.push(found.id);
		}
		if ('problem' in found)
			out.set(r, { practitionerId: null, notes: [...r.notes, `${found.problem}; the order is kept with no prescriber from the directory`] });
		else out.set(r, { practitionerId: found.id, notes: r.notes });
	}
	await directory.linkAccounts(tx, created);
	return out;
}
