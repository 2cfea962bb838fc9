import { expect, type Page } from '@playwright/test';
import { readdirSync, readFileSync } from 'node:fs';
import path from 'node:path';

export const DEMO_PASSWORD = 'larkspur-demo-2026';
export const DEMO = {
	pharmacist: 'pharmacist@larkspur.test',
	pharmacist2: 'pharmacist2@larkspur.test',
	physician: 'physician@larkspur.test',
	physician2: 'physician2@larkspur.test',
	admin: 'admin@larkspur.test'
} as const;

/** Signs in through the real form, as a person would. */
export async function signIn(page: Page, email: string, password = DEMO_PASSWORD) {
	await page.goto('/sign-in');
	await page.getByLabel('E-mail').fill(email);
	await page.getByLabel('Password').fill(password);
	await page.getByRole('button', { name: 'Sign in' }).click();
	await expect(page.getByRole('button', { name: 'Sign out' })).toBeVisible();
}

/** Signs in with the keyboard only: type, Tab, type, Enter. */
export async function signInByKeyboard(page: Page, email: string, password = DEMO_PASSWORD) {
	await page.goto('/sign-in');
	await page.getByLabel('E-mail').focus();
	await page.keyboard.type(email);
	await page.keyboard.press('Tab');
	await page.keyboard.type(password);
	await page.keyboard.press('Enter');
	await expect(page.getByRole('button', { name: 'Sign out' })).toBeVisible();
}

/**
 * The newest answer-link confirmation code e-mailed to `to` at or after `since` (ms), read from the test
 * mailbox (EBBLINE_MAILBOX_DIR) once it has arrived: the message's id (for /dev/mail) and the code.
 */
export async function codeFromMailbox(to: string, since: number): Promise<{ id: string; code: string }> {
	const dir = process.env.EBBLINE_MAILBOX_DIR;
	if (!dir) throw new Error('EBBLINE_MAILBOX_DIR is not set: run the end-to-end tests with `npm test`.');
	let found: { id: string; code: string } | undefined;
	await expect
		.poll(
			() => {
				const mails = readdirSync(dir)
					.filter((n) => n.endsWith('.json'))
					.map(
						(n) =>
							JSON.parse(readFileSync(path.join(dir, n), 'utf8')) as { id: string; receivedAt: string; subject: string; text: string; envelopeTo: string[] }
					)
					.filter((m) => m.envelopeTo.includes(to) && m.subject === 'Your Ebbline confirmation code' && Date.parse(m.receivedAt) >= since - 1000)
					.sort((a, b) => b.receivedAt.localeCompare(a.receivedAt));
				const code = mails[0] && /Confirmation code: (\d{6})/.exec(mails[0].text)?.[1];
				found = code ? { id: mails[0].id, code } : undefined;
				return Boolean(found);
			},
			{ timeout: 30_000, message: 'the confirmation code e-mail should arrive in the test mailbox' }
		)
		.toBe(true);
	return found!;
}
