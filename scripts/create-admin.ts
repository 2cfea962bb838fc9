// The first administrator of a production install (npm run admin:create -- --email … --name "…").
// The password is read from standard input — typed at a prompt that does not echo, or piped — and is
// never printed or logged; the creation is audited like any other.
import { stdin, stdout } from 'node:process';
import { closeDb } from '../src/lib/server/db';
import * as users from '../src/lib/server/users';
import { userCreateSchema } from '../src/lib/validation/users';

function arg(name: string): string | undefined {
	const i = process.argv.indexOf(`--${name}`);
	return i >= 0 ? process.argv[i + 1] : undefined;
}

/** A line from a TTY without echo, or everything piped in (trailing newline removed). */
async function readPassword(): Promise<string> {
	if (stdin.isTTY) {
		stdout.write('Password (at least 12 characters, not shown): ');
		stdin.setRawMode(true);
		stdin.resume();
		let value = '';
		return new Promise((resolve, reject) => {
			stdin.on('data', (chunk: Buffer) => {
				for (const ch of chunk.toString('utf8')) {
					if (ch === '\r' || ch === '\n') {
						stdin.setRawMode(false);
						stdin.pause();
						stdout.write('\n');
						return resolve(value);
					}
					if (ch === '\u0003') return reject(new Error('cancelled'));
					if (ch === '\u007f') value = value.slice(0, -1);
					else value += ch;
				}
			});
		});
	}
	let text = '';
	for await (const chunk of stdin) text += chunk;
	return text.replace(/\r?\n$/, '');
}

async function main() {
	const email = arg('email');
	const name = arg('name');
	if (!email || !name) {
		console.error('[ebbline] usage: npm run admin:create -- --email lead@hospital.example --name "Full Name"   (password on standard input)');
		process.exitCode = 2;
		return;
	}
	const password = await readPassword();
	const parsed = userCreateSchema.safeParse({ email, displayName: name, role: 'admin', password });
	if (!parsed.success) {
		for (const issue of parsed.error.issues) console.error(`[ebbline] ${String(issue.path[0] ?? 'input')}: ${issue.message}`);
		process.exitCode = 2;
		return;
	}
	try {
		await users.create(parsed.data, { actorId: null, actorLabel: 'admin:create command', requestId: null });
	} catch (error) {
		if (error instanceof users.EmailTakenError) {
			console.error(`[ebbline] ${error.message} Nothing was changed.`);
			process.exitCode = 3;
			return;
		}
		throw error;
	}
	console.log(`[ebbline] administrator ${parsed.data.email.trim().toLowerCase()} created; sign in at ORIGIN/sign-in.`);
}

main()
	.catch((error) => {
		console.error('[ebbline] creating the administrator failed:', error.message);
		process.exitCode = 1;
	})
	.finally(closeDb);
