// The queue layer: pg-boss's client, the queue names, how work is sent, and the one place that reads
// pg-boss's table. The jobs themselves (policy and handler, one file per queue) live in jobs/; the
// server library never imports them: the entry passes them in (useJobs, startEmbeddedWorkers).
export { createBoss, getBoss, stopBoss } from './boss';
export { DEAD_LETTER_QUEUE, DEFAULT_RETRY, QUEUES, type JobDefinition, type QueueName } from './job';
export { createQueue, send, sendMany, useJobs, type SendOptions } from './send';
export { holdWaiting, lastFailedJob, queueDepths, type FailedJob, type QueueDepth } from './table';
