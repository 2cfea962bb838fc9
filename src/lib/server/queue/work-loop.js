// How Ebbline's workers take jobs from a pg-boss queue. Plain JavaScript (with JSDoc types) so that
// `npm run bench` (plain Node) measures bare pg-boss with exactly the loop the app uses.
//
// pg-boss's own loop sleeps out the rest of its polling interval after every batch, even a full one,
// so a backlog drains at most one batch per interval per worker. Here a worker that got a full batch
// asks for the next one at once (pg-boss's notifyWorker), and a queue may have several workers, so
// one batch's database round trips overlap another's computation. An empty or partial batch waits for
// the interval as before.

/**
 * Registers `concurrency` workers for a queue.
 * @template T
 * @param {import('pg-boss')} boss
 * @param {string} name
 * @param {import('pg-boss').WorkOptions} options
 * @param {(jobs: import('pg-boss').Job<T>[]) => Promise<unknown>} handler
 * @param {number} [concurrency]
 * @returns {Promise<string[]>} the worker ids
 */
export async function workQueue(boss, name, options, handler, concurrency = 1) {
	const batchSize = options.batchSize ?? 1;
	/** @type {string[]} */
	const ids = [];
	for (let i = 0; i < concurrency; i++) {
		/** @type {string | undefined} */
		let id;
		id = await boss.work(name, options, async (/** @type {import('pg-boss').Job<T>[]} */ jobs) => {
			const result = await handler(jobs);
			if (jobs.length >= batchSize && id) boss.notifyWorker(id);
			return result;
		});
		ids.push(id);
	}
	return ids;
}
