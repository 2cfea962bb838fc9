import type PgBoss from 'pg-boss';
import { deliver } from '../src/lib/server/mail';
import { QUEUES, type JobDefinition } from '../src/lib/server/queue';

/**
 * Delivers one outbox row per job. A relay that is down makes the attempt throw (after the error is
 * recorded on the row) and pg-boss retries with exponential backoff: about 5–10 s, 10–20 s, 20–40 s …
 * (retryDelay × 2^n with jitter), ten times, roughly 1.5–3 hours in all, then the dead-letter queue.
 * The attempt that reaches the retry limit marks the row undeliverable, and a permanent refusal (a 5xx
 * reply such as 550 unknown mailbox) does so at once without retrying; either way the row is listed
 * for an administrator at /admin/mail. The row lock and the 'sent' check in deliver() keep it to one
 * e-mail per row (see mail.ts).
 */
export const mailSend: JobDefinition<{ outboxId: string }> = {
	name: QUEUES.mailSend,
	queue: { retryLimit: 10, retryDelay: 5, retryBackoff: true, policy: 'standard' },
	// retryCount and retryLimit come with each job, so deliver() knows its last attempt
	work: { includeMetadata: true },
	async handler(jobs) {
		const results = [];
		for (const job of jobs as PgBoss.JobWithMetadata<{ outboxId: string }>[]) {
			const finalAttempt = typeof job.retryCount === 'number' && typeof job.retryLimit === 'number' && job.retryCount >= job.retryLimit;
			results.push(await deliver(job.data.outboxId, undefined, { finalAttempt }));
		}
		return results;
	}
};
