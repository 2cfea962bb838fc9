// Applies the committed drizzle/ migrations to DATABASE_URL.
import { migrate } from 'drizzle-orm/postgres-js/migrator';
import { closeDb, getDb } from '../src/lib/server/db';

export async function migrateDatabase() {
	await migrate(getDb(), { migrationsFolder: new URL('../drizzle', import.meta.url).pathname });
}

if (import.meta.url === `file://${process.argv[1]}`) {
	migrateDatabase()
		.then(() => console.log('[ebbline] migrations applied'))
		.catch((error) => {
			console.error('[ebbline] migration failed:', error.message);
			process.exitCode = 1;
		})
		.finally(closeDb);
}
