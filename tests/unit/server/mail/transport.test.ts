// SMTP_REQUIRE_TLS: the options handed to nodemailer, and what nodemailer does with them against a relay
// that offers no STARTTLS.
import { createServer, type Server } from 'node:net';
import { createTransport } from 'nodemailer';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { ConfigError } from '../../../../src/lib/server/config';
import { answerCodeEmail } from '../../../../src/lib/server/recommendations/emails';
import { redactSecrets, transportOptions } from '../../../../src/lib/server/mail/outbox';

describe('transportOptions', () => {
	it('leaves TLS to the URL when SMTP_REQUIRE_TLS is off (the default)', () => {
		const options = transportOptions('smtp://relay.example:25', 'off');
		expect(options).toMatchObject({ url: 'smtp://relay.example:25', connectionTimeout: 10_000 });
		expect(options).not.toHaveProperty('requireTLS');
		expect(options).not.toHaveProperty('secure');
	});

	it('requires STARTTLS on a plain smtp:// URL when on', () => {
		expect(transportOptions('smtp://relay.example:587', 'on')).toMatchObject({ url: 'smtp://relay.example:587', requireTLS: true });
	});

	it('uses implicit TLS for smtps:// when on', () => {
		expect(transportOptions('smtps://relay.example:465', 'on')).toMatchObject({ secure: true });
	});

	it('refuses a URL that switches TLS off, another scheme, or a value other than on/off, naming the variable', () => {
		expect(() => transportOptions('smtp://relay.example:25?ignoreTLS=true', 'on')).toThrow(/SMTP_REQUIRE_TLS=on, but SMTP_URL switches TLS off/);
		expect(() => transportOptions('http://relay.example', 'on')).toThrow(ConfigError);
		expect(() => transportOptions('smtp://relay.example:25', 'yes')).toThrow(/SMTP_REQUIRE_TLS=yes; set it to on or off/);
	});
});

describe('a relay without STARTTLS', () => {
	let server: Server;
	let port = 0;
	const received: string[] = [];

	beforeAll(async () => {
		// a minimal SMTP relay that never offers STARTTLS and accepts anything in clear
		server = createServer((socket) => {
			socket.write('220 relay ESMTP\r\n');
			let inData = false;
			socket.on('data', (chunk) => {
				for (const line of chunk.toString().split('\r\n').filter(Boolean)) {
					if (inData) {
						if (line === '.') {
							inData = false;
							socket.write('250 queued\r\n');
						} else received.push(line);
					} else if (/^(EHLO|HELO)/i.test(line)) socket.write('250-relay\r\n250 8BITMIME\r\n');
					else if (/^DATA/i.test(line)) {
						inData = true;
						socket.write('354 go on\r\n');
					} else if (/^STARTTLS/i.test(line)) socket.write('502 not offered\r\n');
					else if (/^QUIT/i.test(line)) socket.end('221 bye\r\n');
					else socket.write('250 ok\r\n');
				}
			});
		});
		await new Promise<void>((resolve) => server.listen(0, '127.0.0.1', resolve));
		port = (server.address() as { port: number }).port;
	});
	afterAll(() => new Promise<void>((resolve) => server.close(() => resolve())));

	const message = { from: 'ebbline@hospital.example', to: 'dr@hospital.example', subject: 'test', text: 'hello' };

	it('is refused when SMTP_REQUIRE_TLS=on: nothing travels in clear', async () => {
		const transport = createTransport(transportOptions(`smtp://127.0.0.1:${port}`, 'on'));
		await expect(transport.sendMail(message)).rejects.toThrow(/STARTTLS/i);
		expect(received).toEqual([]);
	});

	it('is used when SMTP_REQUIRE_TLS=off', async () => {
		const transport = createTransport(transportOptions(`smtp://127.0.0.1:${port}`, 'off'));
		await transport.sendMail(message);
		expect(received.join('\n')).toContain('hello');
	});
});

describe('the confirmation code e-mail', () => {
	it('names no patient or drug, and its stored copy keeps no code after delivery', () => {
		const mail = answerCodeEmail('042917', 10);
		expect(mail.text).toContain('Confirmation code: 042917');
		expect(mail.subject).toBe('Your Ebbline confirmation code');
		expect(redactSecrets(mail.text, 'answer_code')).not.toContain('042917');
		expect(redactSecrets(mail.html, 'answer_code')).not.toContain('042917');
		// other e-mails keep their numbers
		expect(redactSecrets('Dose 500 mg, MRN 123456', 'recommendation')).toContain('123456');
	});
});
