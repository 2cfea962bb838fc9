// A user sets up a second factor, signs in with a code computed as an authenticator app would, and
// with a recovery code; an administrator resets it. (The e2e app runs with EBBLINE_ADMIN_TOTP=optional,
// so the demo administrator signs in with a password; the requirement itself is tested without a browser.)
import { expect, request as playwrightRequest, test, type Page } from '@playwright/test';
import { decodeBase32IgnorePadding } from '@oslojs/encoding';
import { generateHOTP } from '@oslojs/otp';
import { users } from '../../src/lib/server/auth';
import { closeDb } from '../../src/lib/server/db';
import { DEMO, signIn } from './helpers';

const PASSWORD = 'second factor e2e passphrase';
const email = `totp-${Date.now()}@larkspur.test`;
const name = 'Tove Otp';
const codeFor = (secret: Uint8Array, offsetSteps = 0) => generateHOTP(secret, BigInt(Math.floor(Date.now() / 30_000) + offsetSteps), 6);

test.describe.configure({ mode: 'serial' });

let secret: Uint8Array;
let recoveryCodes: string[] = [];

test.beforeAll(async () => {
	await users.create({ email, displayName: name, role: 'pharmacist', password: PASSWORD }, { actorId: null, actorLabel: 'second-factor e2e', requestId: null });
});
test.afterAll(async () => {
	await closeDb();
});

async function passwordStep(page: Page) {
	await page.goto('/sign-in');
	await page.getByLabel('E-mail').fill(email);
	await page.getByLabel('Password').fill(PASSWORD);
	await page.getByRole('button', { name: 'Sign in' }).click();
	await expect(page.getByRole('heading', { name: 'Enter your code' })).toBeVisible();
}

/** A new browser session (the header's sign-out form is not what this spec is about). */
async function signOut(page: Page) {
	await page.context().clearCookies();
	await page.goto('/');
	await expect(page).toHaveURL(/\/sign-in/);
}

test('a user sets up a second factor from their account page and sees ten recovery codes once', async ({ page }) => {
	await signIn(page, email, PASSWORD);
	await page.getByRole('link', { name: new RegExp(name) }).click();
	await expect(page.getByRole('heading', { name: 'Sign-in security' })).toBeVisible();
	await page.getByRole('button', { name: 'Set up a second factor' }).click();
	await expect(page.getByRole('img', { name: /QR code/ })).toBeVisible();
	const shown = (await page.getByTestId('totp-secret').textContent())!.replaceAll(' ', '').trim();
	secret = decodeBase32IgnorePadding(shown);

	const field = page.getByLabel('Enter the 6-digit code the app shows');
	await field.fill(codeFor(secret) === '123456' ? '654321' : '123456');
	await page.getByRole('button', { name: 'Turn on the second factor' }).click();
	await expect(page.getByText('That code is not right')).toBeVisible();
	await expect(field).toHaveAttribute('aria-invalid', 'true');

	await field.fill(codeFor(secret));
	await page.getByRole('button', { name: 'Turn on the second factor' }).click();
	const list = page.getByRole('list', { name: 'Recovery codes' });
	await expect(list).toBeVisible();
	recoveryCodes = (await list.getByRole('listitem').allTextContents()).map((c) => c.trim());
	expect(recoveryCodes).toHaveLength(10);
	await expect(page.getByText('Recovery codes left: 10 of 10')).toBeVisible();
	// shown once: not on the page when it is opened again
	await page.reload();
	await expect(page.getByRole('list', { name: 'Recovery codes' })).toHaveCount(0);
	await signOut(page);
});

test('signing in asks for the code after the password; a wrong code names the field, a right one signs in', async ({ page }) => {
	await passwordStep(page);
	// no session yet: the board is still closed
	const code = page.getByLabel('Code');
	await code.fill('000000');
	await page.getByRole('button', { name: 'Continue' }).click();
	await expect(page.locator('#code-error')).toContainText('That code is not right');
	await expect(code).toHaveAttribute('aria-invalid', 'true');
	// the step used at set-up is spent: the next step's code, as an app shows it a little later
	await code.fill(codeFor(secret, 1));
	await page.getByRole('button', { name: 'Continue' }).click();
	await expect(page.getByRole('button', { name: 'Sign out' })).toBeVisible();
	await signOut(page);
});

test('a recovery code signs in once', async ({ page }) => {
	await passwordStep(page);
	await page.getByLabel('Code').fill(recoveryCodes[0].toLowerCase());
	await page.getByRole('button', { name: 'Continue' }).click();
	await expect(page.getByRole('button', { name: 'Sign out' })).toBeVisible();
	await page.goto('/account/security');
	await expect(page.getByText('Recovery codes left: 9 of 10')).toBeVisible();
	await signOut(page);

	await passwordStep(page);
	await page.getByLabel('Code').fill(recoveryCodes[0]);
	await page.getByRole('button', { name: 'Continue' }).click();
	await expect(page.locator('#code-error')).toContainText('already used');
});

test('only an administrator may reset a second factor; after the reset the password alone signs in', async ({ page, baseURL }) => {
	// a pharmacist's post to the users page's action is refused before it runs
	const pharmacist = await playwrightRequest.newContext({ baseURL });
	await pharmacist.post('/sign-in', {
		form: { email: DEMO.pharmacist, password: 'larkspur-demo-2026', next: '/' },
		headers: { origin: baseURL! },
		maxRedirects: 0
	});
	const refused = await pharmacist.post('/admin/users?/resetSecondFactor', {
		form: { id: '00000000-0000-4000-8000-000000000000' },
		headers: { origin: baseURL! },
		maxRedirects: 0
	});
	expect(refused.status()).toBe(403);
	await pharmacist.dispose();

	await signIn(page, DEMO.admin);
	await page.goto('/admin/users');
	await page.getByRole('button', { name: `Reset the second factor of ${name}` }).click();
	await expect(page.getByRole('status')).toContainText('Second factor reset');
	await signOut(page);

	await signIn(page, email, PASSWORD);
	await page.goto('/account/security');
	await expect(page.getByRole('button', { name: 'Set up a second factor' })).toBeVisible();
});
