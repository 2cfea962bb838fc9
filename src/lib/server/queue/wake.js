// Waking workers when work is queued, instead of leaving them to their polling interval. Plain
// JavaScript (with JSDoc types), like work-loop.js, so `npm run bench` can use it from plain Node.
//
// A sender adds `pg_notify(WAKE_CHANNEL, <queue name>)` to the transaction that queues the jobs
// (send.ts, table.ts). PostgreSQL delivers a notification only when that transaction commits, so a
// worker is never woken for a job it cannot yet see; one that rolls back wakes nobody, and identical
// notifications of one transaction arrive once. Every process that runs workers (the web process with
// embedded workers, each `npm run worker`) listens on one connection of its own and passes each
// notification to the workers of that queue (work-loop.js). While that connection is down the
// polling interval, which stays, finds the work.
import postgres from 'postgres';
import { listeningClientOptions } from '../db/listening-client.js';

export const WAKE_CHANNEL = 'ebbline_queue_work';

/**
 * @typedef {{ subscribe: (queue: string, onWork: () => void) => () => void, stop: () => Promise<void> }} WakeListener
 */

const RELISTEN_MS = 2_000;

/**
 * Listens for WAKE_CHANNEL on one dedicated connection (as flags/board-cache.ts does: postgres.js's
 * own listen() gives up if PostgreSQL is still away when it tries to reconnect; this tries again every
 * RELISTEN_MS). After each reconnection every subscriber is told once, so work queued while the
 * connection was down is looked for at once.
 * @param {string} connectionString
 * @param {{ onError?: (error: Error) => void }} [options]
 * @returns {Promise<WakeListener>}
 */
export async function listenForWork(connectionString, options = {}) {
	/** @type {Map<string, Set<() => void>>} */
	const subscribers = new Map();
	let stopped = false;
	let listenedBefore = false;
	/** @type {ReturnType<typeof setTimeout> | null} */
	let retry = null;
	/** @param {() => void} onWork */
	const call = (onWork) => {
		try {
			onWork();
		} catch (error) {
			options.onError?.(/** @type {Error} */ (error));
		}
	};
	const scheduleListen = () => {
		if (retry || stopped) return;
		retry = setTimeout(() => {
			retry = null;
			void listen();
		}, RELISTEN_MS);
		retry.unref?.();
	};
	const listen = async () => {
		if (stopped) return;
		try {
			await client.unsafe(`listen ${WAKE_CHANNEL}`);
			// the first listen needs no catching up (workers start by fetching); a later one follows an outage
			if (listenedBefore) for (const set of subscribers.values()) set.forEach(call);
			listenedBefore = true;
		} catch (error) {
			options.onError?.(/** @type {Error} */ (error));
			scheduleListen();
		}
	};
	const client = postgres(
		connectionString,
		listeningClientOptions({
			applicationName: 'ebbline-wake',
			onnotify: (_channel, queue) => subscribers.get(queue)?.forEach(call),
			onclose: () => scheduleListen()
		})
	);
	await listen();
	return {
		subscribe(queue, onWork) {
			let set = subscribers.get(queue);
			if (!set) subscribers.set(queue, (set = new Set()));
			set.add(onWork);
			return () => set.delete(onWork);
		},
		async stop() {
			stopped = true;
			if (retry) clearTimeout(retry);
			subscribers.clear();
			await client.end({ timeout: 2 });
		}
	};
}
