// Structured JSON logs, one line per event. Never log patient names or secrets: pass ids only.
type Fields = Record<string, string | number | boolean | null | undefined>;

function write(level: 'info' | 'warn' | 'error', message: string, fields: Fields = {}) {
	if (process.env.EBBLINE_LOG === 'silent') return;
	const line = JSON.stringify({ time: new Date().toISOString(), level, message, ...fields });
	(level === 'error' ? process.stderr : process.stdout).write(line + '\n');
}

export const logger = {
	info: (message: string, fields?: Fields) => write('info', message, fields),
	warn: (message: string, fields?: Fields) => write('warn', message, fields),
	error: (message: string, fields?: Fields) => write('error', message, fields)
};
