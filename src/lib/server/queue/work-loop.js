// How Ebbline's workers take jobs from a pg-boss queue. Plain JavaScript (with JSDoc types) so that
// `npm run bench` (plain Node) measures bare pg-boss with exactly the loop the app uses.
//
// pg-boss's own loop sleeps out the rest of its polling interval after every batch, even a full one,
// so a backlog drains at most one batch per interval per worker. Here a worker that got a full batch
// asks for the next one at once (pg-boss's notifyWorker), and a queue may have several workers, so
// one batch's database round trips overlap another's computation.
//
// With a wake listener (wake.js), a worker also looks for work soon after a sender's transaction
// that queued some commits, rather than at its next poll: when told while idle, it waits a short
// gathering window (so jobs committed together share a batch) and then fetches. When told while working
// a batch, it remembers: after a full batch it fetches at once as above, after a partial one it waits
// the gathering window again. A worker that is never told polls at its interval as before.

/** How long a woken worker waits for further jobs before fetching, unless the queue sets its own. */
export const DEFAULT_GATHER_MS = 25;

/**
 * Registers `concurrency` workers for a queue.
 * @template T
 * @param {import('pg-boss')} boss
 * @param {string} name
 * @param {import('pg-boss').WorkOptions} options
 * @param {(jobs: import('pg-boss').Job<T>[]) => Promise<unknown>} handler
 * @param {number} [concurrency]
 * @param {{ listener: import('./wake.js').WakeListener, gatherMs?: number }} [wake] woken by senders' notifications
 * @returns {Promise<string[]>} the worker ids
 */
export async function workQueue(boss, name, options, handler, concurrency = 1, wake) {
	const batchSize = options.batchSize ?? 1;
	const gatherMs = wake?.gatherMs ?? DEFAULT_GATHER_MS;
	/** @type {string[]} */
	const ids = [];
	for (let i = 0; i < concurrency; i++) {
		/** @type {string | undefined} */
		let id;
		let working = false;
		let toldWhileWorking = false;
		/** @type {ReturnType<typeof setTimeout> | undefined} */
		let gathering;
		const fetchSoon = () => {
			if (gathering || !id) return;
			const workerId = id;
			gathering = setTimeout(() => {
				gathering = undefined;
				boss.notifyWorker(workerId);
			}, gatherMs);
			gathering.unref?.();
		};
		id = await boss.work(name, options, async (/** @type {import('pg-boss').Job<T>[]} */ jobs) => {
			working = true;
			toldWhileWorking = false;
			let full = false;
			try {
				const result = await handler(jobs);
				full = jobs.length >= batchSize;
				return result;
			} finally {
				working = false;
				if (full && id) boss.notifyWorker(id);
				else if (toldWhileWorking) fetchSoon();
			}
		});
		ids.push(id);
		wake?.listener.subscribe(name, () => {
			if (working) toldWhileWorking = true;
			else fetchSoon();
		});
	}
	return ids;
}
