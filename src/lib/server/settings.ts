import type { Actor } from '../domain/actor';
import { inArray } from 'drizzle-orm';
import { settingsSchema, SETTING_KEYS, type SettingKey, type Settings } from '../validation/settings';
import * as audit from './audit/record';
import { config } from './config';
import { getDb, type DbOrTx } from './db';
import { settings as settingsTable } from './db/schema';
import { logger } from './logger';
import { getBoss, QUEUES } from './queue';

export type { Settings, SettingKey };

const DEFAULTS: Settings = settingsSchema.parse({});

export function defaults(): Settings {
	return { ...DEFAULTS };
}

/**
 * The administrator settings, each validated against its schema. A stored value that no longer
 * validates (an older format, a hand edit) falls back to the default and is logged, so a bad row can
 * never stop the recommendation or digest jobs.
 */
export async function get(db: DbOrTx = getDb()): Promise<Settings> {
	const rows = await db.select().from(settingsTable).where(inArray(settingsTable.key, SETTING_KEYS));
	const result = defaults() as Record<SettingKey, unknown>;
	for (const row of rows) {
		const key = row.key as SettingKey;
		const parsed = settingsSchema.shape[key].safeParse(row.value);
		if (parsed.success) result[key] = parsed.data;
		else logger.warn('stored setting is invalid; using the default', { key });
	}
	return result as Settings;
}

export type SettingsActor = Actor;

/**
 * Saves the changed settings with one audit row (before and after of the changed keys only). A new
 * digest time is handed to pg-boss's scheduler once the change has committed.
 */
export async function update(next: Settings, who: SettingsActor): Promise<{ changed: SettingKey[]; scheduleError: string | null }> {
	const valid = settingsSchema.parse(next);
	const changed = await getDb().transaction(async (tx) => {
		const current = await get(tx);
		const keys = SETTING_KEYS.filter((k) => current[k] !== valid[k]);
		if (keys.length === 0) return [];
		for (const key of keys) {
			await tx
				.insert(settingsTable)
				.values({ key, value: valid[key], updatedBy: who.actorId })
				.onConflictDoUpdate({ target: settingsTable.key, set: { value: valid[key], updatedBy: who.actorId, updatedAt: new Date() } });
		}
		const pick = (s: Settings) => Object.fromEntries(keys.map((k) => [k, s[k]]));
		await audit.record({ ...who, action: 'settings.changed', objectType: 'settings', objectId: keys.join(','), before: pick(current), after: pick(valid) }, tx);
		return keys;
	});
	let scheduleError: string | null = null;
	if (changed.includes('digestCron')) {
		// The setting is saved either way; the worker re-reads it from the database when it next starts.
		try {
			await scheduleDigest(valid.digestCron);
		} catch (error) {
			scheduleError = error instanceof Error ? error.message : String(error);
			logger.error('digest schedule not updated', { error: scheduleError });
		}
	}
	return { changed, scheduleError };
}

/** Upserts the morning digest's cron schedule in the hospital's time zone (pg-boss keeps one per queue). */
export async function scheduleDigest(cron: string) {
	const boss = await getBoss();
	await boss.schedule(QUEUES.digestMorning, cron, {}, { tz: config.hospitalTimeZone });
}
