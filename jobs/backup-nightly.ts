import { config, requireEnv } from '../src/lib/server/config';
import { logger } from '../src/lib/server/logger';
import { backup } from '../src/lib/server/ops';
import { DEFAULT_RETRY, QUEUES, type JobDefinition } from '../src/lib/server/queue';

/**
 * Nightly at 02:30 in the hospital's time zone: a backup of the database into BACKUP_DIR, then the
 * oldest removed so that BACKUP_KEEP remain. BACKUP_KEEP=0 turns it off (e.g. a managed PostgreSQL
 * whose provider keeps point-in-time backups).
 */
export const backupNightly: JobDefinition = {
	name: QUEUES.backupNightly,
	// a large database takes a while to dump; pg-boss would otherwise expire the job after 15 minutes
	queue: { ...DEFAULT_RETRY, retryLimit: 2, retryDelay: 300, policy: 'singleton', expireInSeconds: 6 * 3600 },
	async resolveSchedule() {
		return backup.backupKeep() === 0 ? null : { cron: '30 2 * * *', tz: config.hospitalTimeZone };
	},
	async handler() {
		const keep = backup.backupKeep();
		// a schedule made before BACKUP_KEEP=0 stays in pg-boss; it then finds nothing to do
		if (keep === 0) return { skipped: 'BACKUP_KEEP=0' };
		const taken = await backup.takeBackup({ databaseUrl: requireEnv('DATABASE_URL') });
		const removed = backup.pruneBackups(keep);
		logger.info('backup taken', { file: taken.sidecar.file, sizeBytes: taken.sidecar.sizeBytes, tookMs: taken.sidecar.tookMs, removed: removed.length });
		return { file: taken.sidecar.file, sizeBytes: taken.sidecar.sizeBytes, removed };
	}
};
