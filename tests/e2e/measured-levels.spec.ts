// Measured levels on the patient view ("Done when" of issue 18): a pharmacist opens a vancomycin order with
// two measured levels and sees the patient's own clearance beside the population prior, the AUC24 now, a
// regimen that reaches the AUC window with its caution, and the levels on the chart over the fitted curve —
// each number opening to its trace. A level drawn before the first dose is shown as not fitted, with why;
// an order without levels says its estimate is the population's and what levels would add.
import AxeBuilder from '@axe-core/playwright';
import { expect, test } from '@playwright/test';
import { createDatabase, type Database } from '../../src/lib/server/db';
import { uniqueTag } from '../fixtures/board';
import { createVancomycinWithLevels } from '../fixtures/measured-levels';
import { DEMO, signIn } from './helpers';

let db: Database;

test.beforeAll(async () => {
	const url = process.env.DATABASE_URL;
	if (!url) throw new Error('DATABASE_URL is not set: run the end-to-end tests with `npm test`.');
	db = createDatabase(url, { max: 2 });
});
test.afterAll(async () => {
	await db?.$client.end({ timeout: 5 });
});

const num = (text: string | null) => Number((text ?? '').replace(/[^0-9.]/g, ''));

test('a pharmacist sees the own clearance, the AUC now, a regimen to the window and the fit on the chart', async ({ page }) => {
	const p = await createVancomycinWithLevels(db, uniqueTag());
	await signIn(page, DEMO.pharmacist);
	await page.goto(`/patients/${p.patientId}?order=${p.orderId}`);

	const section = page.locator('#measured-levels');
	await expect(section.getByRole('heading', { name: /Measured levels: Vancomycin/ })).toBeVisible();
	await expect(page.getByTestId('projection-basis')).toContainText('Individual estimate');
	await expect(page.getByTestId('projection-basis')).toContainText('fitted to 2 measured levels');

	// own clearance beside the prior, and different from it
	const clearance = section.getByTestId('levels-kinetics').getByRole('row', { name: /Clearance/ });
	const own = num(await clearance.getByRole('cell').nth(0).textContent());
	const prior = num(await clearance.getByRole('cell').nth(1).textContent());
	expect(own).toBeGreaterThan(0);
	expect(own).toBeLessThan(prior * 0.85);

	// AUC24 now, above the 400–600 window, and a regimen to the window with its caution
	const auc = section.getByTestId('levels-auc');
	await expect(auc).toContainText('above the window 400–600 mg·h/L');
	const proposal = section.getByTestId('levels-proposal');
	await expect(proposal).toContainText(/mg IV every|mg every/);
	const predicted = num((await proposal.textContent())!.match(/AUC24 ([\d,.]+) mg·h\/L/)?.[1] ?? '');
	expect(predicted).toBeGreaterThanOrEqual(400);
	expect(predicted).toBeLessThanOrEqual(600);
	await expect(proposal.getByRole('note', { name: 'Caution about this dose' })).toContainText("Estimate from this patient's measured levels");
	await expect(section.getByTestId('levels-statement')).toContainText('2 levels moved clearance');

	// the chart: two measured marks over the fitted, population and proposal curves; the table says the same
	await expect(section.locator('#levels-chart-title')).toBeVisible();
	await expect(section.locator('.level-mark')).toHaveCount(2);
	for (const legend of [
		'fitted: doses given, own kinetics (solid)',
		'population estimate, doses given (dashed)',
		'proposed regimen from the next dose (dotted)',
		'measured trough',
		'measured peak'
	])
		await expect(section.getByRole('list', { name: 'Legend' })).toContainText(legend);
	const rows = section.getByTestId('levels-table').locator('tbody tr');
	await expect(rows).toHaveCount(2);
	await expect(rows.nth(0)).toContainText('trough');
	await expect(rows.nth(0)).toContainText('fitted');

	await section.screenshot({ path: 'test-results/measured-levels.png' });
	expect((await new AxeBuilder({ page }).include('#measured-levels').withTags(['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa']).analyze()).violations).toEqual([]);

	// each number opens to its trace, by keyboard
	await clearance.getByRole('link').focus();
	await page.keyboard.press('Enter');
	const step = page.locator('#trace-levelMapClearance');
	await expect(step).toBeVisible();
	await expect(step).toContainText('Vancomycin clearance, individual (MAP)');
	await expect(page.locator('#trace-levelPriorClearance')).toContainText('Buelga');
	// one residual step per fitted level, each its own anchor: no id twice on the page (WCAG 2.1 SC 4.1.1)
	await expect(page.locator('#trace-levelResidual-2')).toBeAttached();
	const repeatedIds = await page.evaluate(() => {
		const ids = [...document.querySelectorAll('[id]')].map((e) => e.id);
		return ids.filter((id, i) => ids.indexOf(id) !== i);
	});
	expect(repeatedIds).toEqual([]);
});

test('a level drawn before the first dose is shown as not fitted, with the reason; no levels is a population estimate', async ({ page }) => {
	const withEarly = await createVancomycinWithLevels(db, uniqueTag(), { withEarlyLevel: true });
	const without = await createVancomycinWithLevels(db, uniqueTag(), { noLevels: true });
	await signIn(page, DEMO.pharmacist);

	await page.goto(`/patients/${withEarly.patientId}?order=${withEarly.orderId}`);
	const excluded = page.getByTestId('levels-excluded');
	await expect(excluded).toContainText('drawn before the first dose');
	await expect(page.locator('#measured-levels .level-mark')).toHaveCount(3);
	await expect(page.getByTestId('levels-table').locator('tbody tr').first()).toContainText('not fitted: drawn before the first dose');

	await page.goto(`/patients/${without.patientId}?order=${without.orderId}`);
	await expect(page.getByTestId('levels-empty')).toContainText('population estimate');
	await expect(page.getByTestId('levels-empty')).toContainText("this patient's own clearance and volume, the AUC24 now");
	await expect(page.getByTestId('projection-basis')).toContainText('Population estimate');
	await page.locator('#measured-levels').screenshot({ path: 'test-results/measured-levels-empty.png' });
});
