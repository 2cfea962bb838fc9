import { expect, type Page } from '@playwright/test';

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
