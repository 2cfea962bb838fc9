// `npm run restore -- <file>`: restores a backup into an EMPTY database (DATABASE_URL, or with
// `--into <name>` a database on the private cluster, created when missing; default `ebbline`) as the
// owner role (DATABASE_OWNER_URL when set), checks
// the restored row counts and audit checksum against the backup's sidecar, then migrates an older
// backup forward. Exit 0: restored and checked; 1: failed or the check found differences;
// 2: usage; 3: refused (not empty, newer than this code, damaged), nothing restored.
import { backup } from '../src/lib/server/ops';
import { databaseTarget } from './lib/database-target';
import { grantApp, migrateDatabase } from './migrate';

const USAGE = 'usage: npm run restore -- <backup file> [--into <database on the private cluster>] [--unverified]';

function parseArgs(argv: string[]) {
	const files: string[] = [];
	let into: string | undefined;
	let unverified = false;
	for (let i = 0; i < argv.length; i++) {
		const a = argv[i];
		if (a === '--unverified') unverified = true;
		else if (a === '--into') into = argv[++i];
		else if (a.startsWith('--into=')) into = a.slice('--into='.length);
		else if (a.startsWith('--')) return null;
		else files.push(a);
	}
	return files.length === 1 && (into === undefined || into !== '') ? { file: files[0], into, unverified } : null;
}

async function main() {
	const args = parseArgs(process.argv.slice(2));
	if (!args) {
		console.error(`[ebbline] ${USAGE}`);
		process.exitCode = 2;
		return;
	}
	const target = await databaseTarget({ database: args.into, create: !process.env.DATABASE_URL });
	try {
		console.log(`[ebbline] restoring ${args.file} into ${target.description}`);
		const report = await backup.restoreBackup({
			file: args.file,
			databaseUrl: target.url,
			unverified: args.unverified,
			migrate: async (url) => {
				await migrateDatabase(url, target.appUrl);
			}
		});
		console.log(`[ebbline] restored ${report.backupLevel.tag} into ${report.database} in ${(report.tookMs / 1000).toFixed(1)} s`);
		if (report.mismatches.length > 0) {
			console.error(`[ebbline] CHECK FAILED: the restored database differs from what the backup's sidecar recorded:`);
			for (const m of report.mismatches) console.error(`[ebbline]   ${m}`);
			console.error('[ebbline] The database was not migrated. Do not serve it; restore an earlier backup into a new empty database.');
			process.exitCode = 1;
			return;
		}
		// the restoring role owns everything restored (--no-owner): the app role gets its rights back,
		// and the queue's schema, as after a migration
		const granted = await grantApp(target.url, target.appUrl);
		if (!granted.singleRole) console.log('[ebbline] the app role (DATABASE_URL) has its rights on the restored database');
		if (report.verified) {
			console.log(
				`[ebbline] check passed: row counts of ${report.tablesChecked} tables and the audit log (${report.auditLog.count} rows, checksum ${report.auditLog.checksum}) match the backup`
			);
		} else {
			console.log('[ebbline] NOT CHECKED: restored with --unverified, without a sidecar to compare against');
		}
		console.log(
			report.migratedTo
				? `[ebbline] migrated forward from ${report.backupLevel.tag} to ${report.migratedTo}`
				: '[ebbline] already at the newest migration; nothing to migrate'
		);
	} finally {
		target.release();
	}
}

main().catch((error) => {
	console.error(`[ebbline] ${error instanceof backup.BackupRefusal ? 'restore refused' : 'restore failed'}: ${error.message}`);
	process.exitCode = error instanceof backup.BackupRefusal ? 3 : 1;
});
