import { expect, test, type Page } from '@playwright/test';
import { DEMO, signIn } from './helpers';

const ARC_LABEL = 'Possible augmented renal clearance from CrCl';

function arcCard(page: Page) {
	return page.locator('[data-rule="possible-arc"]').first();
}

test('an administrator edits a threshold, back-tests the draft, publishes it, sees the flags change, then rolls back', async ({ page }) => {
	test.setTimeout(120_000);
	await signIn(page, DEMO.admin);
	await page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Rules' }).click();
	await expect(page.getByRole('heading', { name: 'Rules', level: 1 })).toBeVisible();
	const status = await page.getByTestId('rules-status').textContent();
	const activeBefore = Number(/Active: version (\d+)/.exec(status ?? '')?.[1]);
	expect(activeBefore).toBeGreaterThan(0);

	// an out-of-range threshold is refused, naming it
	const arc = arcCard(page).getByLabel(ARC_LABEL);
	await arc.fill('20');
	await page.getByRole('button', { name: 'Save draft' }).click();
	await expect(arcCard(page).getByRole('alert')).toContainText('(arcCrclMlMin) must be between 90');
	await expect(arcCard(page).getByLabel(ARC_LABEL)).toHaveValue('20');

	// an unknown variable in the JSON Logic view is refused by name
	await arcCard(page).getByText('Advanced: condition as JSON Logic').click();
	const logic = arcCard(page).getByLabel('Condition of Possible augmented renal clearance (JSON Logic)');
	const original = await logic.inputValue();
	await logic.fill(original.replace('"crclMlMin"', '"crclMLmin"'));
	await arcCard(page).getByLabel(ARC_LABEL).fill('120');
	await page.getByRole('button', { name: 'Save draft' }).click();
	await expect(arcCard(page).getByRole('alert')).toContainText('unknown variable "crclMLmin" (did you mean "crclMlMin"?)');

	// a valid edit saves a draft
	await arcCard(page).getByLabel('Condition of Possible augmented renal clearance (JSON Logic)').fill(original);
	await arcCard(page).getByLabel(ARC_LABEL).fill('120');
	await page.getByLabel('Note for this version (optional)').fill('stricter ARC threshold (end-to-end test)');
	await page.getByRole('button', { name: 'Save draft' }).click();
	await expect(page.getByRole('status').filter({ hasText: 'Saved as draft version' })).toBeVisible();
	const draftVersion = Number(/draft version (\d+)/.exec((await page.getByTestId('rules-status').textContent()) ?? '')?.[1]);
	expect(draftVersion).toBeGreaterThan(activeBefore);
	await expect(arcCard(page).getByLabel(ARC_LABEL)).toHaveValue('120');

	// back-test with progress and per-rule counts
	await page.getByLabel('Days of history').fill('7');
	await page.getByRole('button', { name: `Run back-test of version ${draftVersion}` }).click();
	const result = page.getByTestId('backtest-result');
	await expect(result).toBeVisible({ timeout: 60_000 });
	await expect(result).toContainText(`against published version ${activeBefore}`);
	const arcRow = result.locator('tr[data-rule="possible-arc"]');
	await expect(arcRow).toBeVisible();
	const opens = Number(await arcRow.locator('[data-cell="open"]').textContent());
	const removed = await arcRow.locator('[data-cell="removed"]').textContent();
	expect(removed?.startsWith('−0')).toBe(true);
	// a stricter threshold never removes, and every other rule is unchanged
	for (const key of ['aki', 'low-albumin-highly-bound', 'dose-above-band']) {
		await expect(result.locator(`tr[data-rule="${key}"] [data-cell="open"]`)).toHaveText('0');
		await expect(result.locator(`tr[data-rule="${key}"] [data-cell="supersede"]`)).toHaveText('0');
	}
	await page.screenshot({ path: 'test-results/admin-rules-backtest.png', fullPage: true });

	// publish: the draft becomes active and the replay raises the findings the back-test said it would
	await page.getByRole('button', { name: `Publish version ${draftVersion}` }).click();
	const published = page.getByTestId('publish-status');
	await expect(published).toContainText(`Published: version ${draftVersion} is now active.`);
	await expect(published).toContainText(/Re-evaluated \d+ active orders?/, { timeout: 60_000 });
	await expect(published).toContainText(new RegExp(`: ${opens} findings? raised`));
	await expect(page.getByTestId('rules-status')).toContainText(`Active: version ${draftVersion}`);
	const row = page.locator(`tr[data-version="${draftVersion}"]`);
	await expect(row).toContainText('Active');
	await row.getByText('rule changed since').click();
	await expect(row).toContainText(/Possible augmented renal clearance from CrCl: 130\s?mL\/min → 120\s?mL\/min/u);
	await page.screenshot({ path: 'test-results/admin-rules.png', fullPage: true });

	// roll back to what was active before, so the other specs see the default rules
	await page
		.locator(`tr[data-version="${activeBefore}"]`)
		.getByRole('button', { name: `Roll back to v${activeBefore}` })
		.click();
	await expect(page.getByTestId('publish-status')).toContainText(`(a copy of version ${activeBefore}) is now active`);
	await expect(page.getByTestId('publish-status')).toContainText(`${opens} resolved`, { timeout: 60_000 });
});

test('the agent library lists provenance with the example-data notice and names the field at fault', async ({ page }) => {
	await signIn(page, DEMO.admin);
	await page.goto('/admin/agents');
	await expect(page.getByRole('heading', { name: 'Agent library' })).toBeVisible();
	await expect(page.getByRole('note').filter({ hasText: 'Example parameters — to be reviewed by the institution before clinical use.' })).toBeVisible();
	const table = page.getByRole('table', { name: /Agent library/ });
	await expect(table.getByRole('row')).not.toHaveCount(1);

	// sort by protein binding, highest first
	const header = table.getByRole('columnheader', { name: /Protein binding/ });
	await table.getByRole('button', { name: 'Protein binding' }).click();
	if ((await header.getAttribute('aria-sort')) !== 'descending') await table.getByRole('button', { name: 'Protein binding' }).click();
	await expect(header).toHaveAttribute('aria-sort', 'descending');
	// highest binding first: the first row's percentage is the largest
	const first = Number((await table.locator('tbody tr').first().locator('td').nth(3).textContent())?.match(/\d+/)?.[0]);
	const last = Number((await table.locator('tbody tr').last().locator('td').nth(3).textContent())?.match(/\d+/)?.[0]);
	expect(first).toBeGreaterThanOrEqual(last);
	await page.getByLabel('Find an agent').fill('mero');
	await expect(table.locator('tbody tr')).toHaveCount(1);
	await table.getByRole('link', { name: 'Edit Meropenem' }).click();

	const editor = page.locator('form[aria-labelledby="editor-title"]');
	await expect(editor.getByRole('heading', { name: /Meropenem/ })).toBeVisible();
	await expect(editor.getByText('Example parameters — to be reviewed by the institution before clinical use.')).toBeVisible();
	// a band whose upper bound is not above its lower bound is refused, naming the band and the field
	await editor.getByLabel('Band 2: maxCrclMlMin').fill('20');
	await editor.getByRole('button', { name: 'Save Meropenem' }).click();
	await expect(editor.getByRole('alert').first()).toContainText('Renal band 2: Upper CrCl must be above the lower CrCl.');
	await expect(page.getByText('Not saved: Renal band 2')).toBeVisible();
	await page.screenshot({ path: 'test-results/admin-agents.png', fullPage: true });
});

test('a pharmacist gets 403 on the rules and agent pages and their APIs', async ({ page }) => {
	await signIn(page, DEMO.pharmacist);
	await expect(page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Rules' })).toHaveCount(0);
	for (const path of ['/admin/rules', '/admin/agents']) {
		const response = await page.goto(path);
		expect(response?.status(), path).toBe(403);
	}
	const backtest = await page.request.post('/api/v1/admin/rules/backtest', { data: { versionId: '00000000-0000-4000-8000-000000000000', days: 7 } });
	expect(backtest.status()).toBe(403);
	const replay = await page.request.get('/api/v1/admin/rules/replays/00000000-0000-4000-8000-000000000000');
	expect(replay.status()).toBe(403);
	const action = await page.request.post('/admin/rules?/publish', {
		form: { versionId: '00000000-0000-4000-8000-000000000000', expectedActiveId: '00000000-0000-4000-8000-000000000000' },
		headers: { origin: new URL(page.url()).origin }
	});
	expect(action.status()).toBe(403);
});
