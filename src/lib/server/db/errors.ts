/** True when an error means the database cannot be reached right now (down, restarting, refused). */
export function isDatabaseUnavailable(error: unknown): boolean {
	if (!error || typeof error !== 'object') return false;
	const e = error as { code?: string; cause?: unknown; errno?: string };
	const codes = [
		// sockets
		'ECONNREFUSED', 'ECONNRESET', 'EPIPE', 'ETIMEDOUT', 'EHOSTUNREACH', 'ENETUNREACH', 'ERR_STREAM_DESTROYED', 'ERR_STREAM_WRITE_AFTER_END',
		// postgres.js
		'CONNECTION_ENDED', 'CONNECTION_CLOSED', 'CONNECTION_DESTROYED', 'CONNECT_TIMEOUT',
		// PostgreSQL: admin_shutdown, crash_shutdown, cannot_connect_now, connection failures
		'57P01', '57P02', '57P03', '08006', '08001', '08003'
	];
	if (e.code && codes.includes(e.code)) return true;
	return e.cause ? isDatabaseUnavailable(e.cause) : false;
}
