// Dialysis and route end to end: a machine client posts FHIR bundles — a patient on intermittent
// haemodialysis (dialysis Procedures, SNOMED CT 302497006) with pre/post-session creatinines and a
// meropenem order, and a patient in AKI on oral vancomycin — and the running app assesses them through
// the queue. The board shows no AKI or unstable-creatinine flag for the dialysis patient (KDIGO AKI Work
// Group, Kidney Int Suppl 2012;2:1–138 stages acute injury, not a dialysis programme) and no renal flag
// for oral vancomycin (not absorbed: product information); the flag and patient pages show the dialysis
// regimen and status.
import { expect, test, type Page } from '@playwright/test';
import { sql } from 'drizzle-orm';
import { createDatabase, type Database } from '../../src/lib/server/db';
import { dialysisBundle, oralBundle } from '../fixtures/dialysis-feed';
import { DEMO, signIn } from './helpers';

const TAG = `e2e${Date.now().toString(36)}`;
let db: Database;

test.beforeAll(async () => {
	const url = process.env.DATABASE_URL;
	if (!url) throw new Error('DATABASE_URL is not set: run the end-to-end tests with `npm test`.');
	db = createDatabase(url, { max: 2 });
});
test.afterAll(async () => {
	await db?.$client.end({ timeout: 5 });
});

const all = async <T>(query: ReturnType<typeof sql>) => Array.from((await db.execute(query)) as unknown as T[]);

async function createToken(page: Page, name: string): Promise<string> {
	await page.goto('/admin/feed-tokens');
	await page.getByLabel('Name').fill(name);
	await page.getByRole('button', { name: 'Create token' }).click();
	return page.getByLabel('Token secret').inputValue();
}

/** Waits until the order has an assessment newer than `sinceMs` (the queue's worker runs in the app). */
async function assessed(orderSource: string, sinceMs: number) {
	await expect
		.poll(
			async () => {
				const [row] = await all<{ at: Date | null }>(sql`
					select max(a.created_at) as at from assessments a join orders o on o.id = a.order_id where o.source_id = ${orderSource}`);
				return row?.at ? new Date(row.at).getTime() : 0;
			},
			{ timeout: 30_000 }
		)
		.toBeGreaterThan(sinceMs);
}

test('a dialysis patient raises no AKI flag and shows the dialysis regimen; oral vancomycin raises no renal flag', async ({ page, playwright, baseURL }) => {
	await signIn(page, DEMO.admin);
	const secret = await createToken(page, `Renal unit ${TAG}`);
	const machine = await playwright.request.newContext({ baseURL });
	const since = Date.now() - 1000;
	for (const body of [dialysisBundle(TAG, Date.now()), oralBundle(TAG, Date.now())]) {
		const posted = await machine.post('/api/v1/feed', { headers: { authorization: `Bearer ${secret}`, 'content-type': 'application/fhir+json' }, data: body });
		expect(posted.status()).toBe(202);
		expect((await posted.json()).counts.quarantined).toBe(0);
	}
	await assessed(`${TAG}-hd-rx`, since);
	await assessed(`${TAG}-po-vanc`, since);

	const flagsOf = (source: string) =>
		all<{ id: string; rule_key: string }>(sql`
			select f.id, ff.rule_key from flags f join orders o on o.id = f.order_id join flag_findings ff on ff.flag_id = f.id
			where o.source_id = ${source} and f.state <> 'closed' and ff.resolved_at is null`);
	const hd = await flagsOf(`${TAG}-hd-rx`);
	expect(hd.map((f) => f.rule_key)).not.toContain('aki');
	expect(hd.map((f) => f.rule_key)).not.toContain('creatinine-unstable');
	// 1 g q8h is six times the library's meropenem regimen on intermittent haemodialysis (500 mg q24h)
	const above = hd.find((f) => f.rule_key === 'dose-above-band');
	expect(above).toBeTruthy();
	expect(await flagsOf(`${TAG}-po-vanc`)).toEqual([]);

	await page.context().clearCookies();
	await signIn(page, DEMO.pharmacist);
	await page.goto(`/flags/${above!.id}`);
	await expect(page.getByText('Renal function for dosing')).toBeVisible();
	const proposal = page.locator('section[aria-labelledby="proposal-heading"]');
	await expect(proposal).toContainText('500 mg q24h');
	await expect(proposal).toContainText('intermittent haemodialysis');
	await page.screenshot({ path: 'test-results/flag-dialysis.png', fullPage: true });

	const [patient] = await all<{ id: string }>(sql`select id from patients where source_id = ${`${TAG}-hd`}`);
	await page.goto(`/patients/${patient.id}`);
	await expect(page.getByTestId('rrt-status')).toContainText('On intermittent haemodialysis');
	await page.locator('section[aria-labelledby="rrt-title"]').screenshot({ path: 'test-results/patient-dialysis.png' });
});
