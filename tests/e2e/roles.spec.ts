import { expect, test } from '@playwright/test';
import { navFor } from '../../src/lib/navigation';
import { DEMO, signIn } from './helpers';

test('an anonymous visitor is sent to sign in, and back to the page afterwards', async ({ page }) => {
	await page.goto('/admin/users');
	await expect(page).toHaveURL(/\/sign-in\?next=%2Fadmin%2Fusers/);
	await page.getByLabel('E-mail').fill(DEMO.admin);
	await page.getByLabel('Password').fill('larkspur-demo-2026');
	await page.getByRole('button', { name: 'Sign in' }).click();
	await expect(page).toHaveURL(/\/admin\/users$/);
	await expect(page.getByRole('heading', { name: 'Users' })).toBeVisible();
});

test('an e-mail typed before the page has finished loading is kept when its script arrives', async ({ page }) => {
	// hold back the page's JavaScript, as a slow ward network would
	let release!: () => void;
	const held = new Promise<void>((resolve) => (release = resolve));
	await page.route(/\/_app\/immutable\/.*\.js$/, async (route) => {
		await held;
		await route.continue();
	});
	await page.goto('/sign-in', { waitUntil: 'commit' });
	await page.getByLabel('E-mail').fill(DEMO.pharmacist);
	release();
	await page.waitForLoadState('networkidle');
	await expect(page.getByLabel('E-mail')).toHaveValue(DEMO.pharmacist);
	await page.getByLabel('Password').fill('larkspur-demo-2026');
	await page.getByRole('button', { name: 'Sign in' }).click();
	await expect(page.getByRole('button', { name: 'Sign out' })).toBeVisible();
});

test('a wrong password shows a clear message and no session', async ({ page }) => {
	await page.goto('/sign-in');
	await page.getByLabel('E-mail').fill(DEMO.physician);
	await page.getByLabel('Password').fill('not-the-password');
	await page.getByRole('button', { name: 'Sign in' }).click();
	await expect(page.getByRole('alert')).toContainText('do not match');
	await page.goto('/');
	await expect(page).toHaveURL(/\/sign-in/);
});

for (const role of ['pharmacist', 'physician', 'admin'] as const) {
	test(`${role} signs in and sees only the ${role}'s navigation`, async ({ page }) => {
		await signIn(page, DEMO[role]);
		const nav = page.getByRole('navigation', { name: 'Main' });
		const labels = (await nav.getByRole('link').allTextContents()).map((t) => t.trim());
		// the end-to-end app runs with the local test mailbox (EBBLINE_DEV_MAILBOX=on, scripts/test.mjs)
		expect(labels).toEqual(navFor(role, { devMailbox: true }).map((item) => item.label));
		await expect(page.getByRole('note')).toContainText('population kinetics');
		await page.screenshot({ path: `test-results/home-${role}.png`, fullPage: true });
	});
}

test('the administrator’s home page shows the feed’s lag, its last message and the queues', async ({ page, browser }) => {
	await signIn(page, DEMO.admin);
	await page.goto('/');
	const panel = page.getByRole('region', { name: 'Feed and re-assessment' });
	await expect(panel).toBeVisible();
	// the demo seed stored the first messages; other tests may have sent more since, and their orders may still wait
	await expect(panel.getByRole('definition').first()).toHaveText(
		/^(Up to date: every active order has been re-assessed|\d+ (s|min|h|d)\b[\s\S]*(order waits|orders wait) for re-assessment)/
	);
	await expect(panel.getByRole('definition').nth(1)).toHaveText(/^\d+ (s|min|h|d) ago \(.+, (demo seed|demo simulator|FHIR|CSV upload)\)$/);
	await expect(panel.getByRole('heading', { name: 'Queue depth' })).toBeVisible();
	await expect(panel.getByRole('table', { name: 'Jobs waiting and running per queue' }).or(panel.getByText('Every queue is empty'))).toBeVisible();
	// only the administrator sees it
	const other = await browser.newPage();
	await signIn(other, DEMO.pharmacist);
	await other.goto('/');
	await expect(other.getByRole('heading', { name: 'Your morning round' })).toBeVisible();
	await expect(other.getByRole('region', { name: 'Feed and re-assessment' })).toHaveCount(0);
	await other.close();
});

test('a pharmacist or physician gets the designed 403 page on an admin page', async ({ page }) => {
	await signIn(page, DEMO.physician);
	const response = await page.goto('/admin/users');
	expect(response?.status()).toBe(403);
	await expect(page.getByRole('heading', { name: 'Not available to your role' })).toBeVisible();
});

test('an unknown address shows the designed 404 page', async ({ page }) => {
	await signIn(page, DEMO.pharmacist);
	const response = await page.goto('/no-such-page');
	expect(response?.status()).toBe(404);
	await expect(page.getByRole('heading', { name: 'Page not found' })).toBeVisible();
});

test('an administrator adds a user, who can then sign in', async ({ page, browser }) => {
	await signIn(page, DEMO.admin);
	await page.goto('/admin/users');
	const email = `new-${Date.now()}@larkspur.test`;
	await page.getByLabel('Name', { exact: true }).fill('Wilhelmina Test');
	await page.getByLabel('E-mail').fill(email);
	await page.getByLabel('Role', { exact: true }).selectOption('physician');
	await page.getByLabel('Initial password').fill('short');
	await page.getByRole('button', { name: 'Add user' }).click();
	// the browser's own minlength check or the server's message names the field
	await page.getByLabel('Initial password').fill('a-long-enough-password');
	await page.getByRole('button', { name: 'Add user' }).click();
	await expect(page.getByRole('status')).toContainText(`Created ${email}`);
	const other = await browser.newPage();
	await signIn(other, email, 'a-long-enough-password');
	await expect(other.getByRole('heading', { name: /^Good (morning|afternoon|evening), Wilhelmina$/ })).toBeVisible();
	await other.close();
});
