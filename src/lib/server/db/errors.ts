/** True when an error means the database cannot be reached right now (down, restarting, refused). */
export function isDatabaseUnavailable(error: unknown): boolean {
	if (!error || typeof error !== 'object') return false;
	const e = error as { code?: string; cause?: unknown; errno?: string };
	const codes = ['ECONNREFUSED', 'ECONNRESET', 'CONNECTION_ENDED', 'CONNECTION_CLOSED', 'CONNECTION_DESTROYED', 'CONNECT_TIMEOUT', '57P01', '57P02', '57P03', '08006', '08001', '08003'];
	if (e.code && codes.includes(e.code)) return true;
	return e.cause ? isDatabaseUnavailable(e.cause) : false;
}
