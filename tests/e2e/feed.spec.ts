// The feed end to end against the seeded app: an administrator creates a feed token; a machine client
// posts a FHIR bundle with it (and is refused without it, with a revoked one, or with a browser
// session); a pharmacist uploads CSV files in the browser (a small one with an error, and 10,000 rows),
// sees the check, the progress and the summary; the bad row waits in quarantine.
import AxeBuilder from '@axe-core/playwright';
import { expect, test, type Page } from '@playwright/test';
import { sql } from 'drizzle-orm';
import { createDatabase, type Database } from '../../src/lib/server/db';
import { DEMO, signIn } from './helpers';

const TAG = `${Date.now().toString(36)}`.toUpperCase();
let db: Database;
/** a demo inpatient with an active order (seeded as FHIR Patient lbh-p-0002) */
const seeded = { mrn: '' };

test.beforeAll(async () => {
	const url = process.env.DATABASE_URL;
	if (!url) throw new Error('DATABASE_URL is not set: run the end-to-end tests with `npm test`.');
	db = createDatabase(url, { max: 2 });
	seeded.mrn = (await one<{ mrn: string }>(sql`select mrn from patients where source_id = 'lbh-p-0002'`)).mrn;
});
test.afterAll(async () => {
	await db?.$client.end({ timeout: 5 });
});

const one = async <T>(query: ReturnType<typeof sql>) => Array.from((await db.execute(query)) as unknown as T[])[0];
const iso = (msAgo: number) => new Date(Date.now() - msAgo).toISOString().replace(/\.\d{3}Z$/, 'Z');

function bundleFor(mrn: string, id: string) {
	return {
		resourceType: 'Bundle',
		type: 'collection',
		entry: [
			{
				resource: {
					resourceType: 'Observation',
					id,
					status: 'final',
					code: { coding: [{ system: 'http://loinc.org', code: '14682-9' }] },
					subject: { identifier: { value: mrn } },
					effectiveDateTime: iso(60_000),
					valueQuantity: { value: 141, unit: 'umol/L', code: 'umol/L' }
				}
			}
		]
	};
}

async function createToken(page: Page, name: string): Promise<string> {
	await page.goto('/admin/feed-tokens');
	await page.getByLabel('Name').fill(name);
	await page.getByRole('button', { name: 'Create token' }).click();
	const secret = await page.getByLabel('Token secret').inputValue();
	expect(secret).toMatch(/^ebf_/);
	return secret;
}

/** Newest assessment of the seeded patient's orders, as epoch ms. */
async function newestAssessmentMs(mrn: string) {
	const row = await one<{ at: Date | null }>(sql`
		select max(a.created_at) as at from assessments a join patients p on p.id = a.patient_id where p.mrn = ${mrn}`);
	return row?.at ? new Date(row.at).getTime() : 0;
}

test('an administrator creates a feed token; a posted bundle is assessed within seconds; no token, a revoked one or a browser session is refused', async ({
	page,
	playwright,
	baseURL
}) => {
	await signIn(page, DEMO.admin);
	const secret = await createToken(page, `Laboratory ${TAG}`);
	await expect(page.getByText('shown this once')).toBeVisible();
	await page.screenshot({ path: 'test-results/feed-token-created.png', fullPage: true });
	await page.reload();
	await expect(page.getByLabel('Token secret')).toHaveCount(0);
	await expect(page.getByRole('cell', { name: `Laboratory ${TAG}`, exact: true })).toBeVisible();

	const machine = await playwright.request.newContext({ baseURL });
	const before = await newestAssessmentMs(seeded.mrn);
	const posted = await machine.post('/api/v1/feed', {
		headers: { authorization: `Bearer ${secret}`, 'content-type': 'application/fhir+json' },
		data: JSON.stringify(bundleFor(seeded.mrn, `e2e-${TAG}-cr`))
	});
	expect(posted.status()).toBe(202);
	const answer = await posted.json();
	expect(answer.entries).toEqual([{ index: 0, resourceType: 'Observation', id: `e2e-${TAG}-cr`, outcome: 'accepted', detail: 'created' }]);
	expect(answer.ordersQueued).toBeGreaterThan(0);
	await expect.poll(() => newestAssessmentMs(seeded.mrn), { timeout: 15_000 }).toBeGreaterThan(before);

	const messages = async () => (await one<{ n: number }>(sql`select count(*)::int as n from feed_messages`)).n;
	const stored = await messages();
	const bundle = JSON.stringify(bundleFor(seeded.mrn, `e2e-${TAG}-refused`));
	const anonymous = await machine.post('/api/v1/feed', { headers: { 'content-type': 'application/fhir+json' }, data: bundle });
	expect(anonymous.status()).toBe(401);
	// the administrator's browser session carries cookies but no bearer token
	const browser = await page.request.post('/api/v1/feed', { headers: { 'content-type': 'application/fhir+json' }, data: bundle });
	expect(browser.status()).toBe(403);

	await page.goto('/admin/feed-tokens');
	await page.getByRole('button', { name: `Revoke the token Laboratory ${TAG}` }).click();
	await expect(page.getByRole('status')).toContainText('Revoked');
	expect(
		await new AxeBuilder({ page })
			.withTags(['wcag2a', 'wcag2aa'])
			.analyze()
			.then((r) => r.violations.map((v) => v.id))
	).toEqual([]);
	const revoked = await machine.post('/api/v1/feed', { headers: { authorization: `Bearer ${secret}`, 'content-type': 'application/fhir+json' }, data: bundle });
	expect(revoked.status()).toBe(401);
	expect(await messages()).toBe(stored);
	await machine.dispose();
});

test('a feed token created to expire shows its expiry; once expired the feed refuses it saying when, and the page marks it expired', async ({
	page,
	playwright,
	baseURL
}) => {
	await signIn(page, DEMO.admin);
	await page.goto('/admin/feed-tokens');
	await page.getByLabel('Name').fill(`Interim ${TAG}`);
	await page.getByLabel('Expires').selectOption({ label: 'After 30 days' });
	await page.getByRole('button', { name: 'Create token' }).click();
	const secret = await page.getByLabel('Token secret').inputValue();
	await expect(page.getByText('It works until')).toBeVisible();
	const row = page.getByRole('row').filter({ hasText: `Interim ${TAG}` });
	await expect(row.getByTestId('token-status')).toContainText('Active, expires');

	await db.execute(sql`update feed_tokens set expires_at = now() - interval '1 minute' where name = ${`Interim ${TAG}`}`);
	const machine = await playwright.request.newContext({ baseURL });
	const refused = await machine.post('/api/v1/feed', {
		headers: { authorization: `Bearer ${secret}`, 'content-type': 'application/fhir+json' },
		data: JSON.stringify(bundleFor(seeded.mrn, `e2e-${TAG}-expired`))
	});
	expect(refused.status()).toBe(401);
	expect((await refused.json()).error).toMatch(/expired on \d{4}-\d{2}-\d{2}T/);
	expect(refused.headers()['x-content-type-options']).toBe('nosniff');
	await machine.dispose();
	await page.reload();
	await expect(row.getByTestId('token-status')).toContainText('Expired');
});

test('a pharmacist uploads a CSV of results, sees the preview, the error and the summary; the bad row waits in quarantine', async ({ page, browser }) => {
	test.setTimeout(150_000);
	await signIn(page, DEMO.pharmacist);
	await page.getByRole('link', { name: 'Upload' }).click();
	await expect(page.getByRole('heading', { name: 'Upload a CSV file' })).toBeVisible();
	await expect(page.getByRole('link', { name: 'Download the results template (CSV)' })).toBeVisible();
	const csv = [
		'mrn,test,value,unit,observed_at,result_id,given_name,family_name,birth_date,sex',
		`${seeded.mrn},creatinine,1.62,mg/dL,${iso(30 * 60_000)},e2e-${TAG}-1,,,,`,
		`${seeded.mrn},albumin,2.7,g/dL,${iso(30 * 60_000)},e2e-${TAG}-2,,,,`,
		`E2E${TAG},weight,81.4,kg,${iso(2 * 3_600_000)},e2e-${TAG}-3,Hester,Vantongeren ${TAG},1957-08-21,female`,
		`E2E${TAG},creatinine,0.9,umol/L,${iso(2 * 3_600_000)},e2e-${TAG}-4,Hester,Vantongeren ${TAG},1957-08-21,female`
	].join('\n');
	const before = await newestAssessmentMs(seeded.mrn);
	await page.getByLabel('CSV file').setInputFiles({ name: `ward-round-${TAG}.csv`, mimeType: 'text/csv', buffer: Buffer.from(csv) });
	await expect(page.getByRole('table', { name: /First rows/ })).toBeVisible();
	await expect(page.getByText('3 of 4 rows are ready to import')).toBeVisible();
	const errors = page.getByRole('table', { name: /Rows with errors/ });
	await expect(errors.getByRole('row')).toHaveCount(2);
	await expect(errors).toContainText('outside the plausible range for creatinine');
	await expect(errors.getByRole('cell', { name: '5', exact: true })).toBeVisible();
	await expect(page.getByText('creatinine arrives in 2 units')).toBeVisible();

	await page.getByLabel(/All or nothing/).check();
	await expect(page.getByRole('button', { name: /Import all/ })).toBeDisabled();
	await page.getByLabel(/Import valid rows/).check();
	await page.getByRole('button', { name: 'Import 3 valid rows' }).click();
	const summary = page.getByRole('region', { name: 'Import finished' });
	await expect(summary).toContainText('3 rows');
	await expect(summary.getByText('Sent to quarantine').locator('xpath=following-sibling::dd[1]')).toHaveText('1 row');
	await page.screenshot({ path: 'test-results/feed-upload-summary.png', fullPage: true });
	await expect.poll(() => newestAssessmentMs(seeded.mrn), { timeout: 15_000 }).toBeGreaterThan(before);
	expect(
		await new AxeBuilder({ page })
			.withTags(['wcag2a', 'wcag2aa'])
			.analyze()
			.then((r) => r.violations.map((v) => v.id))
	).toEqual([]);

	const adminContext = await browser.newContext();
	const admin = await adminContext.newPage();
	await signIn(admin, DEMO.admin);
	await admin.goto('/admin/quarantine');
	const entry = admin
		.getByRole('article')
		.filter({ hasText: `e2e-${TAG}-4` })
		.or(admin.getByRole('article').filter({ hasText: 'E2E' + TAG }));
	await expect(entry.first()).toContainText('outside the plausible range for creatinine');
	await admin.screenshot({ path: 'test-results/feed-quarantine.png', fullPage: true });
	await entry.first().getByRole('button', { name: 'Discard…' }).click();
	await entry.first().getByLabel('Why is it discarded?').fill('test row from the end-to-end suite');
	await entry.first().getByRole('button', { name: 'Discard', exact: true }).click();
	await expect(admin.getByRole('status')).toContainText('Discarded');
	expect(
		await new AxeBuilder({ page: admin })
			.withTags(['wcag2a', 'wcag2aa'])
			.analyze()
			.then((r) => r.violations.map((v) => v.id))
	).toEqual([]);
	await adminContext.close();
});

test('a 10,000-row file is checked and imported in parts with a progress bar', async ({ page }) => {
	test.setTimeout(240_000);
	await signIn(page, DEMO.pharmacist);
	await page.goto('/feed/upload');
	const lines = ['mrn,test,value,unit,observed_at,result_id,given_name,family_name,birth_date,sex'];
	for (let i = 0; i < 10_000; i++) {
		const p = i % 500;
		lines.push(
			`BULK${TAG}${p},${i % 2 ? 'albumin' : 'creatinine'},${i % 2 ? 30 + (i % 9) : 70 + (i % 60)},${i % 2 ? 'g/L' : 'umol/L'},${iso((i + 60) * 60_000)},bulk-${TAG}-${i},Bulk,Patient ${p},1960-01-0${1 + (p % 9)},${p % 2 ? 'male' : 'female'}`
		);
	}
	await page.getByLabel('CSV file').setInputFiles({ name: `bulk-${TAG}.csv`, mimeType: 'text/csv', buffer: Buffer.from(lines.join('\n')) });
	await expect(page.getByRole('progressbar', { name: 'Progress' })).toBeVisible();
	await expect(page.getByText('10,000 of 10,000 rows are ready to import')).toBeVisible({ timeout: 120_000 });
	await page.getByRole('button', { name: 'Import 10,000 valid rows' }).click();
	await expect(page.getByRole('progressbar', { name: 'Progress' })).toBeVisible();
	await page.screenshot({ path: 'test-results/feed-upload-progress.png' });
	const summary = page.getByRole('region', { name: 'Import finished' });
	await expect(summary).toBeVisible({ timeout: 180_000 });
	await expect(summary.getByText('Stored').locator('xpath=following-sibling::dd[1]')).toHaveText('10,000 rows');
	const stored = await one<{ n: number }>(sql`select count(*)::int as n from lab_results where source_id like ${`bulk-${TAG}-%`}`);
	expect(stored.n).toBe(10_000);
});
