// Local stand-in for the hospital's SMTP relay: accepts mail on loopback and keeps each message as
// JSON in EBBLINE_MAILBOX_DIR, where tests and the dev mailbox page read it back.
import { simpleParser } from 'mailparser';
import { mkdirSync, renameSync, writeFileSync } from 'node:fs';
import path from 'node:path';
import { SMTPServer } from 'smtp-server';

const port = Number(process.env.FAKE_SMTP_PORT ?? 2525);
const mailbox = process.env.EBBLINE_MAILBOX_DIR ?? path.resolve('.data/mailbox');
mkdirSync(mailbox, { recursive: true });

// Like a real relay, some recipients are refused, so the failure paths can be tried by hand and in
// tests: a permanent 550 (unknown mailbox, no retry helps) and a temporary 451 (try again later).
// The patterns match the whole address, case-insensitively.
const refusePermanently = new RegExp(process.env.FAKE_SMTP_REFUSE ?? '^no-such-mailbox[^@]*@', 'i');
const refuseForNow = new RegExp(process.env.FAKE_SMTP_DEFER ?? '^mailbox-busy[^@]*@', 'i');

let counter = 0;
const server = new SMTPServer({
	authOptional: true,
	disabledCommands: ['STARTTLS'],
	logger: false,
	onRcptTo(address, _session, callback) {
		if (refusePermanently.test(address.address)) {
			return callback(Object.assign(new Error(`5.1.1 <${address.address}>: no such mailbox here`), { responseCode: 550 }));
		}
		if (refuseForNow.test(address.address)) {
			return callback(Object.assign(new Error(`4.2.1 <${address.address}>: mailbox busy, try again later`), { responseCode: 451 }));
		}
		callback();
	},
	onData(stream, session, callback) {
		simpleParser(stream)
			.then((mail) => {
				const receivedAt = new Date();
				const name = `${receivedAt.getTime()}-${process.pid}-${++counter}.json`;
				const record = {
					id: name.replace(/\.json$/, ''),
					receivedAt: receivedAt.toISOString(),
					envelopeTo: session.envelope.rcptTo.map((r) => r.address),
					from: mail.from?.text ?? '',
					to: Array.isArray(mail.to) ? mail.to.map((t) => t.text).join(', ') : (mail.to?.text ?? ''),
					subject: mail.subject ?? '',
					messageId: mail.messageId ?? null,
					text: mail.text ?? '',
					html: typeof mail.html === 'string' ? mail.html : ''
				};
				// Written under a temporary name and renamed, so a reader never sees half a message.
				const finalPath = path.join(mailbox, name);
				writeFileSync(`${finalPath}.part`, JSON.stringify(record, null, 2));
				renameSync(`${finalPath}.part`, finalPath);
				callback();
			})
			.catch((error) => callback(error));
	}
});

server.listen(port, '127.0.0.1', () => {
	console.log(`fake SMTP listening on 127.0.0.1:${port}, mailbox ${mailbox}`);
});

for (const signal of ['SIGINT', 'SIGTERM'] as const) {
	process.on(signal, () => server.close(() => process.exit(0)));
}
