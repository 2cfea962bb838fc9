// What the server entry does at start (src/hooks.server.ts): senders find each queue's policy in
// jobs/, loaded on the first send, so a test that queues work creates its queue as the app would.
import { useJobs } from '../../src/lib/server/queue';

useJobs(async () => (await import('../../jobs/registry')).jobs);
