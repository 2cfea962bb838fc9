// The first administrator of a production install:
//   npm run admin:create -- --email lead@hospital.example --name "Full Name"
// The password is read from standard input — typed twice at a prompt that does not echo, or piped — and
// is never printed or logged. It applies the migrations first (so it works on a new, empty database),
// then creates the account through the user service, which audits the creation like any other.
import { stdin, stdout } from 'node:process';
import { closeDb } from '../src/lib/server/db';
import { DEMO_EMAIL_SUFFIX } from '../src/lib/server/ops';
import { users } from '../src/lib/server/auth';
import { userCreateSchema } from '../src/lib/validation/users';
import { migrateDatabase } from './migrate';

const USAGE = 'usage: npm run admin:create -- --email lead@hospital.example --name "Full Name"   (password on standard input)';

/** `--name value` or `--name=value`. */
function arg(name: string): string | undefined {
	const args = process.argv.slice(2);
	const inline = args.find((a) => a.startsWith(`--${name}=`));
	if (inline) return inline.slice(name.length + 3);
	const i = args.indexOf(`--${name}`);
	return i >= 0 && !args[i + 1]?.startsWith('--') ? args[i + 1] : undefined;
}

class Cancelled extends Error {}

/** One line typed at the terminal, not echoed. */
function promptHidden(question: string): Promise<string> {
	stdout.write(question);
	stdin.setRawMode(true);
	stdin.resume();
	let value = '';
	return new Promise((resolve, reject) => {
		const done = (error?: Error) => {
			stdin.off('data', onData);
			stdin.setRawMode(false);
			stdin.pause();
			stdout.write('\n');
			if (error) reject(error);
			else resolve(value);
		};
		const onData = (chunk: Buffer) => {
			for (const ch of chunk.toString('utf8')) {
				if (ch === '\r' || ch === '\n') return done();
				if (ch === '\u0003' || ch === '\u0004') return done(new Cancelled('cancelled; nothing was changed.'));
				if (ch === '\u007f' || ch === '\b') value = Array.from(value).slice(0, -1).join('');
				else if (ch >= ' ') value += ch;
			}
		};
		stdin.on('data', onData);
	});
}

async function readPassword(): Promise<string> {
	if (stdin.isTTY) {
		const first = await promptHidden('Password (at least 12 characters, not shown): ');
		const second = await promptHidden('The same password again: ');
		if (first !== second) throw new Cancelled('the two passwords differ; nothing was changed.');
		return first;
	}
	// piped: everything on standard input, without the final line break
	let text = '';
	for await (const chunk of stdin) text += chunk;
	return text.replace(/\r?\n$/, '');
}

async function main() {
	const email = arg('email');
	const name = arg('name');
	if (!email || !name) {
		console.error(`[ebbline] ${USAGE}`);
		process.exitCode = 2;
		return;
	}
	// the e-mail and name are checked before the password is asked for
	const preliminary = userCreateSchema.omit({ password: true }).safeParse({ email, displayName: name, role: 'admin' });
	if (!preliminary.success) {
		for (const issue of preliminary.error.issues) console.error(`[ebbline] ${String(issue.path[0] ?? 'input')}: ${issue.message}`);
		process.exitCode = 2;
		return;
	}
	if (email.trim().toLowerCase().endsWith(DEMO_EMAIL_SUFFIX)) {
		console.error(
			`[ebbline] email: addresses in the ${DEMO_EMAIL_SUFFIX} domain are the demo's; npm run serve refuses a database holding one. Use the person's real address.`
		);
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
	await migrateDatabase();
	try {
		await users.create(parsed.data, { actorId: null, actorLabel: 'admin:create command', requestId: null });
	} catch (error) {
		if (error instanceof users.EmailTakenError) {
			console.error(`[ebbline] ${error.message} Nothing was changed; sign in with that account, or choose another e-mail.`);
			process.exitCode = 3;
			return;
		}
		throw error;
	}
	console.log(`[ebbline] administrator ${parsed.data.email.trim().toLowerCase()} created (active); sign in at ORIGIN/sign-in.`);
}

main()
	.catch((error) => {
		console.error(error instanceof Cancelled ? `[ebbline] ${error.message}` : `[ebbline] creating the administrator failed: ${error.message}`);
		process.exitCode = error instanceof Cancelled ? 2 : 1;
	})
	.finally(closeDb);
