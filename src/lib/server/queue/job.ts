import type PgBoss from 'pg-boss';

/** What each file in jobs/ exports: one queue, its policy, and its handler. */
export type JobDefinition<Data extends object = object> = {
	name: string;
	queue: Omit<PgBoss.Queue, 'name'>;
	work?: PgBoss.WorkOptions;
	/** workers for this queue in each process (default 1); see queue/work-loop.js */
	concurrency?: number;
	/** cron schedule (pg-boss syntax) with an optional time zone */
	schedule?: { cron: string; tz?: string; data?: object };
	/** a schedule read when the worker starts (e.g. from the settings table); wins over `schedule` */
	resolveSchedule?: () => Promise<{ cron: string; tz?: string; data?: object } | null>;
	handler: (jobs: PgBoss.Job<Data>[], boss: PgBoss) => Promise<unknown>;
};

/** Retry with exponential backoff, then to the dead-letter queue: the default for every queue. */
export const DEFAULT_RETRY = { retryLimit: 5, retryDelay: 2, retryBackoff: true } as const;
export const DEAD_LETTER_QUEUE = 'dead-letter';
