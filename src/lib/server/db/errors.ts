/** Error codes meaning the database cannot be reached right now (down, restarting, refused). */
const UNAVAILABLE = new Set([
	// sockets
	'ECONNREFUSED',
	'ECONNRESET',
	'EPIPE',
	'ETIMEDOUT',
	'EHOSTUNREACH',
	'ENETUNREACH',
	'ERR_STREAM_DESTROYED',
	'ERR_STREAM_WRITE_AFTER_END',
	// postgres.js
	'CONNECTION_ENDED',
	'CONNECTION_CLOSED',
	'CONNECTION_DESTROYED',
	'CONNECT_TIMEOUT',
	// PostgreSQL: admin_shutdown, crash_shutdown, cannot_connect_now, connection failures
	'57P01',
	'57P02',
	'57P03',
	'08006',
	'08001',
	'08003'
]);

/** The codes along an error's cause chain, outermost first (e.g. a driver's 57P01 under Drizzle's "Failed query"). */
export function causeCodes(error: unknown): string[] {
	const codes: string[] = [];
	for (let e = error as { code?: unknown; cause?: unknown } | null, depth = 0; e && typeof e === 'object' && depth < 5; e = e.cause as typeof e, depth++) {
		if (e.code !== undefined) codes.push(String(e.code));
	}
	return codes;
}

/** True when an error means the database cannot be reached right now (down, restarting, refused). */
export function isDatabaseUnavailable(error: unknown): boolean {
	return causeCodes(error).some((code) => UNAVAILABLE.has(code));
}
