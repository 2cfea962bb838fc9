// Registers every job handler with pg-boss. Runs inside the web process by default, or on its own
// (`npm run worker`, with EBBLINE_WORKERS=off on the web processes) to scale out.
import type PgBoss from 'pg-boss';
import { closeDb } from '../src/lib/server/db';
import { logger } from '../src/lib/server/logger';
import { requireEnv } from '../src/lib/server/config';
import { createBoss, createQueue, stopBoss, useJobs } from '../src/lib/server/queue';
import { listenForWork, type WakeListener } from '../src/lib/server/queue/wake.js';
import { workQueue } from '../src/lib/server/queue/work-loop.js';
import { jobs } from './registry';

export { jobs };

let running: PgBoss | undefined;
let listening: WakeListener | undefined;
/** how long a stopping worker waits for the jobs it is running, ms */
export const SHUTDOWN_WORKERS_MS = 5_000;

export async function startWorkers(options: { only?: string[]; schedules?: boolean } = {}) {
	// what this process sends (a handler may queue other work) is created with its own policy too
	useJobs(async () => jobs);
	const boss = createBoss();
	await boss.start();
	// senders' notifications wake the workers (queue/wake.js); the polling interval stays the fallback
	const listener = await listenForWork(requireEnv('DATABASE_URL'), {
		onError: (error) => logger.warn('queue wake failed (the workers still poll)', { error: error.message })
	});
	listening = listener;
	for (const job of jobs) {
		if (options.only && !options.only.includes(job.name)) continue;
		const queue = await createQueue(boss, job);
		await boss.updateQueue(job.name, queue);
		await workQueue(boss, job.name, job.work ?? {}, (batch) => job.handler(batch, boss), job.concurrency ?? 1, { listener, gatherMs: job.gatherMs });
		const schedule = options.schedules === false ? null : job.resolveSchedule ? await job.resolveSchedule() : job.schedule;
		if (schedule) {
			await boss.schedule(job.name, schedule.cron, schedule.data ?? {}, { tz: schedule.tz });
		}
	}
	running = boss;
	logger.info('workers started', { queues: jobs.map((j) => j.name).join(',') });
	return boss;
}

export async function stopWorkers() {
	if (listening) {
		await listening.stop();
		listening = undefined;
	}
	if (running) {
		// a job still running after this is left to expire and run again (jobs are idempotent): the whole
		// shutdown stays well inside a service manager's stop timeout (closing the app takes at most ~12 s)
		await running.stop({ graceful: true, wait: true, timeout: SHUTDOWN_WORKERS_MS });
		running = undefined;
	}
}

if (import.meta.url === `file://${process.argv[1]}`) {
	startWorkers().catch((error) => {
		logger.error('worker failed to start', { error: error.message });
		process.exit(1);
	});
	for (const signal of ['SIGINT', 'SIGTERM'] as const) {
		process.on(signal, async () => {
			await stopWorkers();
			await stopBoss();
			await closeDb();
			process.exit(0);
		});
	}
}
