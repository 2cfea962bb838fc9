import type PgBoss from 'pg-boss';

/** Every queue's name, in one place. */
export const QUEUES = {
	orderReassess: 'order.reassess',
	rulesReplay: 'rules.replay',
	feedSimulate: 'feed.simulate',
	mailSend: 'mail.send',
	mailPurge: 'mail.purge',
	recommendationRemind: 'recommendation.remind',
	recommendationSweep: 'recommendation.sweep',
	flagWake: 'flag.wake',
	digestMorning: 'digest.morning',
	sessionCleanup: 'session.cleanup',
	backupNightly: 'backup.nightly'
} as const;
export type QueueName = (typeof QUEUES)[keyof typeof QUEUES];

/** What each file in jobs/ exports: one queue, its policy, and its handler. */
export type JobDefinition<Data extends object = object> = {
	name: QueueName;
	/** the queue's policy, set when it is created (by a sender or the workers) and updated when the workers start */
	queue: Omit<PgBoss.Queue, 'name'>;
	work?: PgBoss.WorkOptions;
	/** workers for this queue in each process (default 1); see queue/work-loop.js */
	concurrency?: number;
	/** how long a worker woken by a sender's notification waits for more jobs before fetching (default 25 ms; queue/work-loop.js) */
	gatherMs?: number;
	/** cron schedule (pg-boss syntax) with an optional time zone */
	schedule?: { cron: string; tz?: string; data?: object };
	/** a schedule read when the worker starts (e.g. from the settings table); wins over `schedule` */
	resolveSchedule?: () => Promise<{ cron: string; tz?: string; data?: object } | null>;
	handler: (jobs: PgBoss.Job<Data>[], boss: PgBoss) => Promise<unknown>;
};

/** Retry with exponential backoff, then to the dead-letter queue: the default for every queue. */
export const DEFAULT_RETRY = { retryLimit: 5, retryDelay: 2, retryBackoff: true } as const;
export const DEAD_LETTER_QUEUE = 'dead-letter';
