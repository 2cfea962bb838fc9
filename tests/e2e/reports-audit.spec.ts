import AxeBuilder from '@axe-core/playwright';
import { expect, test } from '@playwright/test';
import Papa from 'papaparse';
import postgres from 'postgres';
import { readFile } from 'node:fs/promises';
import { DEMO, signIn } from './helpers';

// The report must show numbers whatever else the demo holds, so this spec adds one stay of its own on
// a ward no one else uses and checks the days of therapy for it exactly. Times are 12:00 UTC, which is
// the same calendar day in the hospital zone (Europe/London) in winter and summer.
const WARD = `E2E Report Ward ${Date.now().toString(36)}`;
const DAY_MS = 86_400_000;
const noonUtc = (daysAgo: number) => {
	const d = new Date(Date.now() - daysAgo * DAY_MS);
	return new Date(Date.UTC(d.getUTCFullYear(), d.getUTCMonth(), d.getUTCDate(), 12));
};
let sql: postgres.Sql | null = null;
let patientId: string | null = null;
let agentName = '';

test.beforeAll(async () => {
	const url = process.env.DATABASE_URL;
	if (!url) throw new Error('DATABASE_URL is not set: run the end-to-end tests with `npm test`.');
	sql = postgres(url, { max: 1, onnotice: () => {} });
	let [agent] = await sql<{ id: string; name: string }[]>`select id, name from agents order by name limit 1`;
	if (!agent) {
		[agent] = await sql<{ id: string; name: string }[]>`
			insert into agents (code, name, agent_class, params) values ('E2E-REPORT', 'Example agent (report test)', 'example class', '{}'::jsonb)
			returning id, name`;
	}
	agentName = agent.name;
	const [patient] = await sql<{ id: string }[]>`
		insert into patients (mrn, given_name, family_name, birth_date, sex)
		values (${`E2E-RPT-${Date.now()}`}, 'Invented', 'Reportcase', '1950-06-01', 'male') returning id`;
	patientId = patient.id;
	// In hospital from 5 days ago to 1 day ago (noon to noon): 5 patient-days (days present).
	const [encounter] = await sql<{ id: string }[]>`
		insert into encounters (patient_id, ward, admitted_at, discharged_at)
		values (${patientId}, ${WARD}, ${noonUtc(5)}, ${noonUtc(1)}) returning id`;
	// One dose a day at noon, 4, 3 and 2 days ago (stopped an hour after the third): 3 DOT.
	await sql`
		insert into orders (patient_id, encounter_id, agent_id, dose_mg, interval_h, infusion_h, status, start_at, stopped_at)
		values (${patientId}, ${encounter.id}, ${agent.id}, 1000, 24, 0.5, 'stopped', ${noonUtc(4)}, ${new Date(noonUtc(2).getTime() + 3_600_000)})`;
});

test.afterAll(async () => {
	if (sql && patientId) await sql`delete from patients where id = ${patientId}`;
	await sql?.end();
});

test('an administrator reads the last 30 days, exports a table and narrows it to one ward', async ({ page }) => {
	// two report loads over the demo's 90 days of history, a download and two accessibility scans: on a
	// busy two-core machine this takes more than the default minute
	test.setTimeout(120_000);
	await signIn(page, DEMO.admin);
	await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Reports' }).click();
	// the first visit loads and draws the charts: allow for a busy machine
	await expect(page).toHaveURL(/\/reports$/, { timeout: 30_000 });
	await expect(page.getByRole('heading', { name: 'Stewardship report' })).toBeVisible();
	// the default range: the last 30 days, all wards
	await expect(page.getByText(/· all wards ·/)).toBeVisible();
	const dotSection = page.getByRole('region', { name: 'By agent' });
	await expect(dotSection).toBeVisible();
	await expect(page.getByRole('region', { name: 'How these numbers are counted' })).toContainText(
		'CDC NHSN Patient Safety Component Manual, Antimicrobial Use and Resistance (AUR) Module'
	);
	await page.screenshot({ path: 'test-results/reports-last-30-days.png', fullPage: true });
	expect((await new AxeBuilder({ page }).withTags(['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa']).analyze()).violations).toEqual([]);

	// Export DOT by agent: the file holds the same total as the page.
	const totalOnPage = (
		await dotSection
			.getByRole('row', { name: /^All agents/ })
			.getByRole('cell')
			.nth(1)
			.textContent()
	)?.trim();
	const [download] = await Promise.all([page.waitForEvent('download'), dotSection.getByRole('link', { name: /Download CSV/ }).click()]);
	expect(download.suggestedFilename()).toMatch(/^ebbline-dot-by-agent-\d{4}-\d{2}-\d{2}-to-\d{4}-\d{2}-\d{2}-all-wards\.csv$/);
	const csv = Papa.parse<Record<string, string | number>>(await readFile(await download.path(), 'utf8'), {
		header: true,
		dynamicTyping: true,
		skipEmptyLines: true
	});
	expect(csv.errors).toEqual([]);
	const all = csv.data.find((r) => r['Agent'] === 'All agents');
	expect(String(all?.['DOT (days)'])).toBe(totalOnPage?.replace(/,/g, ''));
	expect(Number(all?.['DOT (days)'])).toBeGreaterThanOrEqual(3);

	// Narrow to this spec's ward: 3 DOT over 5 patient-days = 600 per 1,000 (NHSN AUR: one DOT per agent per day given).
	const wards = page.getByRole('group', { name: /Wards/ });
	await wards.getByLabel(WARD).check();
	await page.getByRole('button', { name: 'Show report' }).click();
	await expect(page).toHaveURL(new RegExp(`ward=${encodeURIComponent(WARD).replace(/%20/g, '\\+')}`), { timeout: 30_000 });
	const agentRow = page
		.getByRole('region', { name: 'By agent' })
		.getByRole('row', { name: new RegExp(`^${agentName.replace(/[.*+?^${}()|[\]\\]/g, '\\$&')}`) });
	// cells after the agent's name: class, DOT, DOT per 1,000 patient-days, patient-days
	await expect(agentRow.getByRole('cell')).toHaveText([/.*/, '3', '600', '5']);
	await page.screenshot({ path: 'test-results/reports-one-ward.png', fullPage: true });
	await page.emulateMedia({ media: 'print' });
	await expect(page.getByRole('navigation', { name: 'Main' })).toBeHidden();
	await expect(page.getByRole('button', { name: 'Show report' })).toBeHidden();
	await page.screenshot({ path: 'test-results/reports-print.png', fullPage: true });
	await page.emulateMedia({ media: 'screen' });
});

test('an administrator traces changes in the audit log, filtered by action', async ({ page }) => {
	await signIn(page, DEMO.admin);
	await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Audit log' }).click();
	await expect(page.getByRole('heading', { name: 'Audit log' })).toBeVisible({ timeout: 15_000 });
	await page.screenshot({ path: 'test-results/audit-log.png', fullPage: true });
	await page.getByLabel('Action').selectOption('auth.sign_in');
	await page.getByRole('button', { name: 'Apply filters' }).click();
	await expect(page).toHaveURL(/action=auth.sign_in/, { timeout: 15_000 });
	const rows = page.getByRole('table', { name: /Audit log entries/ }).locator('tbody tr');
	await expect(rows.first()).toBeVisible();
	const actions = await rows.locator('td:nth-child(3)').allTextContents();
	expect(actions.length).toBeGreaterThan(0);
	expect(new Set(actions.map((a) => a.trim()))).toEqual(new Set(['auth.sign_in']));
	await expect(rows.first()).toContainText(DEMO.admin);
	expect((await new AxeBuilder({ page }).withTags(['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa']).analyze()).violations).toEqual([]);
	await page.screenshot({ path: 'test-results/audit-log-sign-ins.png', fullPage: true });
});
