// Storing patients and encounters (set-based upserts that recognise an unchanged resource).
import { eq, inArray, or, sql } from 'drizzle-orm';
import type { Tx } from '../db';
import { encounters, patients } from '../db/schema';
import { takeIncoming } from '../db/upsert';
import type { EncounterRecord, IntakeRecord, PatientRecord, PatientRef } from './types';

import { insertedFlag, latestPerKey, type Hooks } from './store-common';

export async function upsertPatients(tx: Tx, list: PatientRecord[], hooks: Hooks & { affectedPatients: Set<string> }) {
	if (list.length === 0) return;
	const recs = latestPerKey(list, (r) => r.mrn, hooks.setOutcome);
	const sourceIds = recs.map((r) => r.sourceId).filter((s): s is string => s !== null);
	const mrns = recs.map((r) => r.mrn);
	const existing = await tx
		.select({
			id: patients.id,
			sourceId: patients.sourceId,
			mrn: patients.mrn,
			givenName: patients.givenName,
			familyName: patients.familyName,
			birthDate: patients.birthDate,
			sex: patients.sex
		})
		.from(patients)
		.where(sourceIds.length ? or(inArray(patients.sourceId, sourceIds), inArray(patients.mrn, mrns)) : inArray(patients.mrn, mrns));
	const bySource = new Map(existing.filter((p) => p.sourceId).map((p) => [p.sourceId as string, p]));
	const byMrn = new Map(existing.map((p) => [p.mrn, p]));
	const inserts: PatientRecord[] = [];
	for (const r of recs) {
		const a = r.sourceId ? bySource.get(r.sourceId) : undefined;
		const b = byMrn.get(r.mrn);
		if ((a && b && a.id !== b.id) || (!a && b && r.sourceId && b.sourceId && b.sourceId !== r.sourceId)) {
			hooks.reject(r, 'identifier', `identifier: MRN ${r.mrn} already belongs to another patient (Patient/${b?.sourceId ?? b?.id})`);
			continue;
		}
		const target = a ?? b;
		if (!target) {
			inserts.push(r);
			continue;
		}
		const givenName = r.givenName || target.givenName;
		const familyName = r.familyName || target.familyName;
		const same =
			target.mrn === r.mrn &&
			target.givenName === givenName &&
			target.familyName === familyName &&
			target.birthDate === r.birthDate &&
			target.sex === r.sex &&
			(r.sourceId === null || target.sourceId === r.sourceId);
		if (same) {
			hooks.setOutcome(r, 'duplicate');
			continue;
		}
		await tx
			.update(patients)
			.set({ mrn: r.mrn, sourceId: r.sourceId ?? target.sourceId, givenName, familyName, birthDate: r.birthDate, sex: r.sex })
			.where(eq(patients.id, target.id));
		// age and sex feed the renal equations: their orders need a new look
		if (target.birthDate !== r.birthDate || target.sex !== r.sex) hooks.affectedPatients.add(target.id);
		hooks.setOutcome(r, 'accepted', 'updated');
	}
	if (inserts.length > 0) {
		await tx
			.insert(patients)
			.values(inserts.map((r) => ({ mrn: r.mrn, sourceId: r.sourceId, givenName: r.givenName, familyName: r.familyName, birthDate: r.birthDate, sex: r.sex })))
			.onConflictDoNothing();
		for (const r of inserts) hooks.setOutcome(r, 'accepted', 'created');
	}
}

/** One query for all references; returns the lookup. */
export async function resolvePatients(tx: Tx, refs: PatientRef[]): Promise<(ref: PatientRef) => string | undefined> {
	const sourceIds = [...new Set(refs.map((r) => r.sourceId).filter((s): s is string => !!s))];
	const mrns = [...new Set(refs.map((r) => r.mrn).filter((s): s is string => !!s))];
	if (sourceIds.length === 0 && mrns.length === 0) return () => undefined;
	const conditions = [];
	if (sourceIds.length) conditions.push(inArray(patients.sourceId, sourceIds));
	if (mrns.length) conditions.push(inArray(patients.mrn, mrns));
	const found = await tx
		.select({ id: patients.id, sourceId: patients.sourceId, mrn: patients.mrn })
		.from(patients)
		.where(or(...conditions));
	const bySource = new Map(found.filter((p) => p.sourceId).map((p) => [p.sourceId as string, p.id]));
	const byMrn = new Map(found.map((p) => [p.mrn, p.id]));
	return (ref) => (ref.sourceId ? bySource.get(ref.sourceId) : undefined) ?? (ref.mrn ? byMrn.get(ref.mrn) : undefined);
}

export async function upsertEncounters(tx: Tx, list: EncounterRecord[], resolved: Map<IntakeRecord, string>, setOutcome: Hooks['setOutcome']) {
	if (list.length === 0) return;
	const recs = latestPerKey(list, (r) => r.sourceId, setOutcome);
	const changed = await tx
		.insert(encounters)
		.values(
			recs.map((r) => ({
				patientId: resolved.get(r) as string,
				sourceId: r.sourceId,
				ward: r.ward,
				bed: r.bed,
				admittedAt: r.admittedAt,
				dischargedAt: r.dischargedAt
			}))
		)
		.onConflictDoUpdate({
			target: encounters.sourceId,
			set: { ...takeIncoming(encounters, ['ward', 'bed', 'admittedAt', 'dischargedAt']), updatedAt: sql`now()` },
			setWhere: sql`(encounters.ward, encounters.bed, encounters.admitted_at, encounters.discharged_at)
				is distinct from (excluded.ward, excluded.bed, excluded.admitted_at, excluded.discharged_at)`
		})
		.returning({ sourceId: encounters.sourceId, inserted: insertedFlag });
	const bySource = new Map(changed.map((c) => [c.sourceId, c.inserted]));
	for (const r of recs) {
		const inserted = bySource.get(r.sourceId);
		if (inserted === undefined) setOutcome(r, 'duplicate');
		else setOutcome(r, 'accepted', inserted ? 'created' : 'updated');
	}
}

/** Entry index of a Practitioner → the prescriber it was stored as. */
