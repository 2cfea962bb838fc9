// A worked batch is marked completed or failed by pg-boss without awaiting the call; with PostgreSQL
// gone at that moment the rejection must not end the process (Node.js: unhandled rejections throw by
// default since v15). Seen in the PostgreSQL-restart fault test; common practice to handle every promise.
import { readFileSync } from 'node:fs';
import { createRequire } from 'node:module';
import path from 'node:path';
import { describe, expect, it } from 'vitest';

const require = createRequire(import.meta.url);
// the package as installed: the guard is scripts/patches/pg-boss+10.4.2.patch, applied by npm install
const Manager = require('pg-boss/src/manager.js') as { prototype: Record<'complete' | 'fail', (...args: unknown[]) => Promise<unknown>> };

const warnings: { message: string; error: string }[] = [];
/** A manager whose database has just gone away. */
const managerWithDatabaseDown = {
	emit: (event: string, warning: { message: string; error: string }) => event === 'warning' && warnings.push(warning),
	db: { executeSql: () => Promise.reject(new Error('the database system is shutting down')) },
	mapCompletionIdArg: (id: string) => [id],
	mapCompletionDataArg: (data: unknown) => data ?? null,
	mapCommandResponse: () => ({}),
	completeJobsCommand: 'complete',
	failJobsByIdCommand: 'fail'
};

describe('pg-boss completion while PostgreSQL is down (scripts/patches, applied by npm install)', () => {
	for (const method of ['complete', 'fail'] as const) {
		it(`${method}() called without await leaves no unhandled rejection, and still rejects for a caller that awaits`, async () => {
			const unhandled: unknown[] = [];
			const onUnhandled = (reason: unknown) => unhandled.push(reason);
			process.on('unhandledRejection', onUnhandled);
			try {
				// as pg-boss's worker does after a batch
				void Manager.prototype[method].call(managerWithDatabaseDown, 'order.reassess', 'job-1');
				await new Promise((resolve) => setTimeout(resolve, 50));
				expect(unhandled).toEqual([]);
				// reported (createBoss logs it) rather than lost
				expect(warnings.at(-1)).toEqual({
					message: `queue: could not mark jobs ${method === 'complete' ? 'completed' : 'failed'}; they will expire and be retried`,
					error: 'the database system is shutting down'
				});
				await expect(Manager.prototype[method].call(managerWithDatabaseDown, 'order.reassess', 'job-2')).rejects.toThrow(/shutting down/);
			} finally {
				process.off('unhandledRejection', onUnhandled);
			}
		});
	}
});

describe('postgres.js with the nextWrite guard (scripts/patches, applied by npm install)', () => {
	// porsager/postgres#1154 and #1208: a write scheduled just before the connection closes ran against
	// a null socket and threw from a timer, ending the process during a database restart.
	it('is installed in every build of the driver', () => {
		// the package's exports hide its files; its main entry (cjs/src/index.js) sits two folders down
		const root = path.resolve(path.dirname(require.resolve('postgres')), '../..');
		for (const build of ['src', 'cjs/src', 'cf/src']) {
			const source = readFileSync(path.join(root, build, 'connection.js'), 'utf8');
			expect(source, build).toMatch(/function nextWrite\(fn\) \{\n\s+\/\/ the connection closed[\s\S]{0,200}if \(!socket\) \{/);
		}
	});
});

describe('PgBoss after the patch', () => {
	it('still offers complete() and fail() under their own names', async () => {
		const { default: PgBoss } = await import('pg-boss');
		const boss = new PgBoss({ connectionString: 'postgres://127.0.0.1:9/none' });
		expect(typeof (boss as unknown as Record<string, unknown>).complete).toBe('function');
		expect(typeof (boss as unknown as Record<string, unknown>).fail).toBe('function');
	});
});
