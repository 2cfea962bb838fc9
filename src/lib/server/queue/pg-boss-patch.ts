// pg-boss 10 marks a worked batch completed (or failed) without awaiting the call. When PostgreSQL
// goes away at that moment the call rejects with nobody listening, and Node ends the process on an
// unhandled rejection: the app would die in a database restart instead of answering 503 and coming
// back. Here each such call's promise is marked as handled; callers that await it still get the
// error. The jobs stay active, expire and are retried (every handler is idempotent).
import { createRequire } from 'node:module';
import { logger } from '../logger';

type ManagerMethod = (this: unknown, ...args: unknown[]) => Promise<unknown>;
type ManagerPrototype = Record<'complete' | 'fail', ManagerMethod & { ebblineHandled?: true }>;

export function patchUnawaitedCompletion(prototype: ManagerPrototype) {
	for (const name of ['complete', 'fail'] as const) {
		const original = prototype[name];
		if (original.ebblineHandled) continue;
		const patched: ManagerMethod & { ebblineHandled?: true } = function (this: unknown, ...args: unknown[]) {
			const promise = original.apply(this, args);
			promise.catch((error: Error) =>
				logger.warn(`queue: could not mark jobs ${name === 'complete' ? 'completed' : 'failed'}; they will expire and be retried`, { error: error.message })
			);
			return promise;
		};
		patched.ebblineHandled = true;
		// PgBoss exposes the manager's methods under their function names (boss.complete, boss.fail)
		Object.defineProperty(patched, 'name', { value: name });
		prototype[name] = patched;
	}
}

const require = createRequire(import.meta.url);
patchUnawaitedCompletion((require('pg-boss/src/manager.js') as { prototype: ManagerPrototype }).prototype);
