// The options of a connection kept open to LISTEN (the queue's wake-ups, the board cache's changes).
// Plain JavaScript (with JSDoc types), like queue/wake.js, which uses it.

/**
 * Seconds postgres.js waits before reconnecting for a query that is waiting. Its default grows with
 * every failed attempt to 20 s, so after an outage of some seconds the listener came back up to 20 s
 * after PostgreSQL did, and a stop in that window left the reconnect timer holding the process open
 * (postgres.js's end() does not cancel it). The callers re-listen on their own every 2 s, so a short,
 * fixed wait loses nothing.
 */
export const LISTEN_RECONNECT_S = 0.5;

/**
 * One connection, never closed for idleness or age (a listening connection looks idle), no type fetch,
 * notices ignored. `onnotify` and `onclose` are options postgres.js implements (its own listen() is
 * built on them) but does not type.
 * @param {{ applicationName: string, onnotify: (channel: string, payload: string) => void, onclose: () => void }} handlers
 * @returns {import('postgres').Options<{}>}
 */
export function listeningClientOptions({ applicationName, onnotify, onclose }) {
	return /** @type {import('postgres').Options<{}>} */ ({
		max: 1,
		idle_timeout: 0,
		max_lifetime: 0,
		fetch_types: false,
		connect_timeout: 10,
		backoff: LISTEN_RECONNECT_S,
		onnotice: () => {},
		connection: { application_name: applicationName },
		onnotify,
		onclose
	});
}
