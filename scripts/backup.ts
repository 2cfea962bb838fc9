// `npm run backup`: a consistent, compressed pg_dump of DATABASE_URL (or of the demo database on the
// private cluster `npm start` uses) into BACKUP_DIR (default .data/backups), with a JSON sidecar that
// `npm run restore` checks the restored database against. Keeps every backup; the nightly job prunes.
import path from 'node:path';
import { backup } from '../src/lib/server/ops';
import { databaseTarget } from './lib/database-target';

const megabytes = (bytes: number) => `${(bytes / 1024 / 1024).toFixed(1)} MB`;

async function main() {
	const target = await databaseTarget();
	try {
		console.log(`[ebbline] backing up ${target.description}`);
		const { path: file, sidecarPath, sidecar } = await backup.takeBackup({ databaseUrl: target.url });
		const rows = Object.values(sidecar.rowCounts).reduce((a, b) => a + b, 0);
		console.log(`[ebbline] backup written: ${path.relative(process.cwd(), file) || file}`);
		console.log(
			`[ebbline]   ${megabytes(sidecar.sizeBytes)} in ${(sidecar.tookMs / 1000).toFixed(1)} s; Ebbline ${sidecar.ebblineVersion}, migration ${sidecar.migration.tag}`
		);
		console.log(
			`[ebbline]   ${Object.keys(sidecar.rowCounts).length} tables, ${rows} rows; audit log ${sidecar.auditLog.count} rows, checksum ${sidecar.auditLog.checksum}`
		);
		console.log(`[ebbline]   sha256 ${sidecar.sha256}; sidecar ${path.relative(process.cwd(), sidecarPath) || sidecarPath}`);
	} finally {
		target.release();
	}
}

main().catch((error) => {
	console.error(`[ebbline] backup failed: ${error.message}`);
	process.exitCode = error instanceof backup.BackupRefusal ? 3 : 1;
});
