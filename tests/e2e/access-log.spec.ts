import AxeBuilder from '@axe-core/playwright';
import { expect, test } from '@playwright/test';
import { readFile } from 'node:fs/promises';
import postgres from 'postgres';
import { DEMO, signIn } from './helpers';

// An administrator opens a patient, then finds that read in the access log by keyboard: filter by
// MRN, an empty result, a bad filter named, and the CSV export.
let sql: postgres.Sql | null = null;
let patient: { id: string; mrn: string };

test.beforeAll(async () => {
	const url = process.env.DATABASE_URL;
	if (!url) throw new Error('DATABASE_URL is not set: run the end-to-end tests with `npm test`.');
	sql = postgres(url, { max: 1, onnotice: () => {} });
	[patient] = await sql<{ id: string; mrn: string }[]>`select id, mrn from patients order by mrn desc limit 1`;
	if (!patient) throw new Error('the demo hospital should have patients');
});

test.afterAll(async () => {
	await sql?.end();
});

test('an administrator finds a read of a patient in the access log, filters it by keyboard and exports it', async ({ page }) => {
	await signIn(page, DEMO.admin);
	await page.goto(`/patients/${patient.id}`);
	await expect(page.getByText(patient.mrn).first()).toBeVisible({ timeout: 15_000 });

	await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Access log' }).click();
	await expect(page.getByRole('heading', { name: 'Access log', level: 1 })).toBeVisible({ timeout: 15_000 });
	const rows = page.getByRole('table', { name: /Access log entries/ }).locator('tbody tr');
	await expect(rows.filter({ hasText: patient.mrn }).filter({ hasText: 'Patient page' }).first()).toContainText(DEMO.admin);

	// keyboard only: type the MRN into the patient filter and submit with Enter
	await page.getByLabel('Patient', { exact: true }).focus();
	await page.keyboard.type(patient.mrn.toLowerCase());
	await page.keyboard.press('Enter');
	await expect(page).toHaveURL(new RegExp(`patient=${patient.mrn.toLowerCase()}`), { timeout: 15_000 });
	await expect(rows.first()).toBeVisible();
	const patientCells = await rows.locator('td:nth-child(4)').allTextContents();
	expect(new Set(patientCells.map((c) => c.trim()))).toEqual(new Set([patient.mrn]));
	expect((await new AxeBuilder({ page }).withTags(['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa']).analyze()).violations).toEqual([]);
	await page.screenshot({ path: 'test-results/access-log.png', fullPage: true });

	const download = page.waitForEvent('download');
	await page.getByRole('link', { name: /Download CSV/ }).click();
	const csv = await readFile((await (await download).path())!, 'utf8');
	const lines = csv
		.replace(/^\ufeff/, '')
		.trimEnd()
		.split('\r\n');
	expect(lines[0]).toBe('id,at (UTC),actor,actor id,role,kind,object id,patient MRN,patient id,route,status,request id');
	expect(lines.length - 1).toBeGreaterThanOrEqual(patientCells.length); // the page shows 50 at a time; the file has all
	expect(lines.slice(1).every((l) => l.includes(`,${patient.mrn},${patient.id},`))).toBe(true);

	// nothing matches: the empty state says what to do next
	await page.goto('/admin/access?patient=NO-SUCH-MRN-E2E');
	await expect(page.getByRole('heading', { name: 'No reads match these filters' })).toBeVisible();
	await expect(page.getByRole('link', { name: 'clear all filters' })).toBeVisible();
	await page.screenshot({ path: 'test-results/access-log-empty.png', fullPage: true });
	expect((await new AxeBuilder({ page }).withTags(['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa']).analyze()).violations).toEqual([]);

	// a bad filter is named, beside its field
	await page.goto('/admin/access?patient=not%20an%20mrn!');
	await expect(page.getByRole('alert')).toContainText('Patient must be an MRN or a patient id');
	await expect(page.getByLabel('Patient', { exact: true })).toHaveAttribute('aria-invalid', 'true');
});
