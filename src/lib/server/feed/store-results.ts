// Storing results (labs and body measurements), their withdrawals (drug levels too), and dialysis sessions.
import { eq, inArray, sql, type SQL } from 'drizzle-orm';
import type { Tx } from '../db';
import { bodyMeasurements, drugLevels, labResults, renalReplacementEvents } from '../db/schema';
import type { IntakeRecord, RenalReplacementRecord, ResultRecord, RetractRecord } from './types';

import { bySourceId, type Hooks } from './store-common';

export function sameResult(a: ResultRecord, b: ResultRecord) {
	return a.value === b.value && a.unit === b.unit && a.loinc === b.loinc && a.observedAt.getTime() === b.observedAt.getTime();
}

type LabRow = {
	patient_id: string;
	analyte: 'creatinine' | 'albumin';
	loinc: string;
	value: number;
	unit: string;
	value_normalised: number;
	unit_normalised: string;
	observed_at: Date;
	source_id: string;
	message_id: string;
	/** when the feed received it (the intake's clock) */
	created_at: Date;
};
type BodyRow = Omit<LabRow, 'analyte' | 'loinc' | 'unit_normalised'> & { kind: 'height' | 'weight' };
type Changed = { sourceId: string; patientId: string; inserted: boolean };

/**
 * Results are upserted from one JSON parameter read with jsonb_to_recordset: a bundle's hundred rows
 * as separate parameters cost more to build and bind than to store. A row whose stored values are the
 * same is left alone and not returned (a duplicate).
 */
const LAB_UPSERT = (rows: string) => sql`
	insert into lab_results (patient_id, analyte, loinc, value, unit, value_normalised, unit_normalised, observed_at, source_id, message_id, created_at)
	select patient_id, analyte, loinc, value, unit, value_normalised, unit_normalised, observed_at, source_id, message_id, created_at
	from jsonb_to_recordset(${rows}::jsonb) as v(patient_id uuid, analyte analyte, loinc text, value float8, unit text,
		value_normalised float8, unit_normalised text, observed_at timestamptz, source_id text, message_id uuid, created_at timestamptz)
	on conflict (source_id) do update set
		patient_id = excluded.patient_id, analyte = excluded.analyte, loinc = excluded.loinc, value = excluded.value,
		unit = excluded.unit, value_normalised = excluded.value_normalised, unit_normalised = excluded.unit_normalised,
		observed_at = excluded.observed_at, message_id = excluded.message_id
	where (lab_results.patient_id, lab_results.loinc, lab_results.value, lab_results.unit, lab_results.observed_at)
		is distinct from (excluded.patient_id, excluded.loinc, excluded.value, excluded.unit, excluded.observed_at)
	returning source_id as "sourceId", patient_id as "patientId", (xmax = 0) as inserted`;

const BODY_UPSERT = (rows: string) => sql`
	insert into body_measurements (patient_id, kind, value, unit, value_normalised, observed_at, source_id, message_id, created_at)
	select patient_id, kind, value, unit, value_normalised, observed_at, source_id, message_id, created_at
	from jsonb_to_recordset(${rows}::jsonb) as v(patient_id uuid, kind measurement_kind, value float8, unit text,
		value_normalised float8, observed_at timestamptz, source_id text, message_id uuid, created_at timestamptz)
	on conflict (source_id) do update set
		patient_id = excluded.patient_id, kind = excluded.kind, value = excluded.value, unit = excluded.unit,
		value_normalised = excluded.value_normalised, observed_at = excluded.observed_at, message_id = excluded.message_id
	where (body_measurements.patient_id, body_measurements.kind, body_measurements.value, body_measurements.unit, body_measurements.observed_at)
		is distinct from (excluded.patient_id, excluded.kind, excluded.value, excluded.unit, excluded.observed_at)
	returning source_id as "sourceId", patient_id as "patientId", (xmax = 0) as inserted`;

export async function upsertRows<T>(tx: Tx, statement: (rows: string) => SQL, rows: T[]): Promise<Changed[]> {
	const changed: Changed[] = [];
	for (let i = 0; i < rows.length; i += 4000) {
		const result = await tx.execute(statement(JSON.stringify(rows.slice(i, i + 4000))));
		changed.push(...Array.from(result as unknown as Iterable<Changed>));
	}
	return changed;
}

export async function upsertResults(
	tx: Tx,
	list: ResultRecord[],
	resolved: Map<IntakeRecord, string>,
	messageId: string,
	hooks: Hooks & { affectedPatients: Set<string>; now: Date }
) {
	if (list.length === 0) return;
	const isLab = (r: ResultRecord) => r.measure === 'creatinine' || r.measure === 'albumin';
	const firstById = new Map<string, ResultRecord>();
	const keep: ResultRecord[] = [];
	for (const r of list) {
		const key = `${isLab(r) ? 'lab' : 'body'}:${r.sourceId}`;
		const first = firstById.get(key);
		if (!first) {
			firstById.set(key, r);
			keep.push(r);
		} else if (sameResult(first, r) && resolved.get(first) === resolved.get(r)) hooks.setOutcome(r, 'duplicate');
		else hooks.reject(r, 'id', `id ${r.sourceId} appears twice in this message with different values; send one version`);
	}
	// the same order of keys in every transaction keeps concurrent messages from deadlocking
	const labs = keep.filter(isLab).sort(bySourceId);
	const body = keep.filter((r) => !isLab(r)).sort(bySourceId);
	const stored = (r: ResultRecord) => ({
		patient_id: resolved.get(r) as string,
		value: r.value,
		unit: r.unit,
		value_normalised: r.valueNormalised,
		observed_at: r.observedAt,
		source_id: r.sourceId,
		message_id: messageId,
		created_at: hooks.now
	});
	const changedLabs = await upsertRows<LabRow>(
		tx,
		LAB_UPSERT,
		labs.map((r) => ({
			...stored(r),
			analyte: r.measure as LabRow['analyte'],
			loinc: r.loinc,
			unit_normalised: r.unitNormalised
		}))
	);
	const changedBody = await upsertRows<BodyRow>(
		tx,
		BODY_UPSERT,
		body.map((r) => ({ ...stored(r), kind: r.measure as BodyRow['kind'] }))
	);
	const labChange = new Map(changedLabs.map((c) => [c.sourceId, c]));
	const bodyChange = new Map(changedBody.map((c) => [c.sourceId, c]));
	for (const r of keep) {
		const c = (isLab(r) ? labChange : bodyChange).get(r.sourceId);
		if (!c) hooks.setOutcome(r, 'duplicate');
		else {
			hooks.affectedPatients.add(c.patientId);
			hooks.setOutcome(r, 'accepted', c.inserted ? 'created' : 'updated');
		}
	}
}

export async function applyRetractions(tx: Tx, list: RetractRecord[], hooks: Hooks & { affectedPatients: Set<string> }) {
	if (list.length === 0) return;
	const ids = [...new Set(list.map((r) => r.sourceId))];
	const [labs, body, levels] = await Promise.all([
		tx.delete(labResults).where(inArray(labResults.sourceId, ids)).returning({ sourceId: labResults.sourceId, patientId: labResults.patientId }),
		tx
			.delete(bodyMeasurements)
			.where(inArray(bodyMeasurements.sourceId, ids))
			.returning({ sourceId: bodyMeasurements.sourceId, patientId: bodyMeasurements.patientId }),
		tx.delete(drugLevels).where(inArray(drugLevels.sourceId, ids)).returning({ sourceId: drugLevels.sourceId, patientId: drugLevels.patientId })
	]);
	const gone = new Map([...labs, ...body, ...levels].map((r) => [r.sourceId as string, r.patientId]));
	const seen = new Set<string>();
	for (const r of list) {
		const patientId = gone.get(r.sourceId);
		if (patientId && !seen.has(r.sourceId)) {
			seen.add(r.sourceId);
			hooks.affectedPatients.add(patientId);
			hooks.setOutcome(r, 'accepted', 'retracted');
		} else if (patientId) hooks.setOutcome(r, 'duplicate');
		else hooks.reject(r, 'id', `id ${r.sourceId}: no stored result has this id, so there is nothing to withdraw`);
	}
}

/**
 * Dialysis sessions and conditions, idempotent by source id ("Procedure/<id>", "Condition/<id>"): the
 * same content again changes nothing; a changed one is updated; entered-in-error removes it.
 */
export async function upsertRenalReplacement(
	tx: Tx,
	list: RenalReplacementRecord[],
	resolved: Map<IntakeRecord, string>,
	messageId: string,
	hooks: Hooks & { affectedPatients: Set<string> }
) {
	if (list.length === 0) return;
	for (const r of [...list].sort(bySourceId)) {
		const patientId = resolved.get(r) as string;
		if (r.remove) {
			const gone = await tx
				.delete(renalReplacementEvents)
				.where(eq(renalReplacementEvents.sourceId, r.sourceId))
				.returning({ patientId: renalReplacementEvents.patientId });
			if (gone.length === 0) hooks.reject(r, 'id', `id ${r.sourceId}: nothing stored has this id, so there is nothing to withdraw`);
			else {
				hooks.affectedPatients.add(gone[0].patientId);
				hooks.setOutcome(r, 'accepted', 'retracted');
			}
			continue;
		}
		const rows = Array.from(
			(await tx.execute(sql`
				insert into renal_replacement_events (patient_id, kind, mode, from_at, to_at, source_id, message_id)
				values (${patientId}::uuid, ${r.eventKind}, ${r.mode}, ${r.from.toISOString()}::timestamptz, ${r.to === null ? null : r.to.toISOString()}::timestamptz, ${r.sourceId}, ${messageId}::uuid)
				on conflict (source_id) do update set patient_id = excluded.patient_id, kind = excluded.kind, mode = excluded.mode,
					from_at = excluded.from_at, to_at = excluded.to_at, message_id = excluded.message_id
				where (renal_replacement_events.patient_id, renal_replacement_events.kind, renal_replacement_events.mode, renal_replacement_events.from_at, renal_replacement_events.to_at)
					is distinct from (excluded.patient_id, excluded.kind, excluded.mode, excluded.from_at, excluded.to_at)
				returning (xmax = 0) as inserted`)) as unknown as Iterable<{ inserted: boolean }>
		);
		if (rows.length === 0) hooks.setOutcome(r, 'duplicate');
		else {
			hooks.affectedPatients.add(patientId);
			hooks.setOutcome(r, 'accepted', rows[0].inserted ? 'created' : 'updated');
		}
	}
}
