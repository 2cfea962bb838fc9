// One order, one flag: an order on which three rules hold appears once on the triage board, with its
// worst finding and markers for the others. A pharmacist works it by keyboard from the board to a
// recommendation that lists every finding, and the physician's one answer closes the whole flag.
import { expect as baseExpect, test } from '@playwright/test';
import { eq } from 'drizzle-orm';
import { readdirSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { createDatabase, type Database } from '../../src/lib/server/db';
import { flags, recommendations, users } from '../../src/lib/server/db/schema';
import { createFlag, type FlagFixture } from '../fixtures/recommendations';
import { uniqueTag } from '../fixtures/board';
import { codeFromMailbox, DEMO, signInByKeyboard } from './helpers';

const expect = baseExpect.configure({ timeout: 20_000 });
test.describe.configure({ timeout: 180_000 });

const WARD = `Renal Unit ${uniqueTag()}`;
let db: Database;
let fixture: FlagFixture;

test.beforeAll(async () => {
	const url = process.env.DATABASE_URL;
	if (!url) throw new Error('DATABASE_URL is not set: run the end-to-end tests with `npm test`.');
	db = createDatabase(url, { max: 2 });
	const [physician] = await db.select({ id: users.id }).from(users).where(eq(users.email, DEMO.physician));
	fixture = await createFlag(db, {
		prescriberId: physician.id,
		ward: WARD,
		moreFindings: [
			{ ruleKey: 'aki', severity: 'high', text: 'KDIGO stage 2 acute kidney injury: creatinine 2.7 times its baseline.' },
			{ ruleKey: 'half-life-prolonged', severity: 'moderate', text: 'Expected half-life 2.9 times what it was at the start.' }
		]
	});
});

test.afterAll(async () => {
	await db?.$client.end({ timeout: 5 });
});

function mailFor(mrn: string) {
	const dir = process.env.EBBLINE_MAILBOX_DIR;
	if (!dir) throw new Error('EBBLINE_MAILBOX_DIR is not set: run the end-to-end tests with `npm test`.');
	for (const name of readdirSync(dir).filter((n) => n.endsWith('.json'))) {
		const mail = JSON.parse(readFileSync(path.join(dir, name), 'utf8')) as { subject: string; text: string };
		if (mail.text.includes(`MRN ${mrn}`) && mail.subject.startsWith('Dose recommendation')) return mail;
	}
	return null;
}

test('a flag with three findings is one row, one review and one recommendation, settled by one answer', async ({ page, browser }) => {
	await signInByKeyboard(page, DEMO.pharmacist);
	await page.goto(`/board?ward=${encodeURIComponent(WARD)}`);
	const rows = page.locator('tbody tr.board-row');
	await expect(rows).toHaveCount(1);
	const row = rows.first();
	await expect(row).toContainText('Daily dose is above the renal band');
	// the other findings as markers: shape and word, never colour alone
	await expect(row.getByTestId('other-finding')).toHaveCount(2);
	await expect(row.getByTestId('other-finding').first()).toContainText('High');
	await expect(row.getByTestId('other-finding').nth(1)).toContainText('Moderate');
	await page.screenshot({ path: 'test-results/board-one-flag-per-order.png' });

	// j moves to the first row, Enter opens the flag
	await page.keyboard.press('j');
	await expect(row).toBeFocused();
	await page.keyboard.press('Enter');
	await expect(page).toHaveURL(new RegExp(`/flags/${fixture.flagId}$`));
	const findings = page.getByTestId('finding');
	await expect(findings).toHaveCount(3);
	await expect(page.getByRole('heading', { name: /^Findings/ })).toContainText('3 holding now');
	await expect(findings.nth(1)).toContainText('KDIGO stage 2 acute kidney injury');
	await page.screenshot({ path: 'test-results/flag-three-findings.png', fullPage: true });

	// c claims, r composes
	await page.keyboard.press('c');
	await expect(page.getByRole('status').filter({ hasText: 'You claimed this flag.' })).toBeVisible();
	await page.keyboard.press('r');
	await expect(page).toHaveURL(new RegExp(`/flags/${fixture.flagId}/recommend$`));
	await expect(page.getByTestId('recommended-findings').locator('li')).toHaveCount(3);
	const message = page.getByLabel('Message');
	await expect(message).toHaveValue(/Findings:\n- Daily dose is above the renal band/);
	await expect(message).toHaveValue(/- KDIGO stage 2 acute kidney injury/);
	await expect(message).toHaveValue(/- Expected half-life 2\.9 times/);
	await page.getByRole('button', { name: 'Send recommendation' }).focus();
	await page.keyboard.press('Enter');
	await expect(page).toHaveURL(/\/board/);
	expect((await db.select().from(flags).where(eq(flags.id, fixture.flagId)))[0].state).toBe('recommended');
	// the board no longer lists it as waiting, and nothing else of the order is left on it
	await page.goto(`/board?ward=${encodeURIComponent(WARD)}&state=new`);
	await expect(page.getByText(/No flags match|Nothing on the board/)).toBeVisible();

	// the e-mail lists all three findings; the physician answers from its link
	await expect.poll(() => Boolean(mailFor(fixture.mrn)), { timeout: 30_000 }).toBe(true);
	const mail = mailFor(fixture.mrn)!;
	expect(mail.text).toContain('Findings (3)');
	for (const text of ['Daily dose is above the renal band', 'KDIGO stage 2 acute kidney injury', 'Expected half-life 2.9 times'])
		expect(mail.text).toContain(text);
	const link = /https?:\/\/\S+\/respond\/[A-Za-z0-9_-]{43}/.exec(mail.text)![0];
	const physicianContext = await browser.newContext();
	const physician = await physicianContext.newPage();
	await physician.goto(link);
	await expect(physician.getByRole('heading', { name: 'Dose recommendation: Meropenem' })).toBeVisible();
	// the second key: a code e-mailed to the address the recommendation went to
	const asked = Date.now();
	await physician.getByRole('button', { name: 'E-mail me a code' }).click();
	await physician.getByLabel('Code from the e-mail').fill((await codeFromMailbox(DEMO.physician, asked)).code);
	await physician.getByRole('button', { name: 'Confirm' }).click();
	await expect(physician.getByTestId('recommended-findings').locator('li')).toHaveCount(3);
	await physician.getByRole('button', { name: 'Accept the proposed regimen' }).focus();
	await physician.keyboard.press('Enter');
	await expect(physician.getByRole('heading', { name: 'This recommendation has been answered' })).toBeVisible();
	await physicianContext.close();

	const [closed] = await db.select().from(flags).where(eq(flags.id, fixture.flagId));
	expect(closed).toMatchObject({ state: 'closed', outcome: 'accepted' });
	const open = (await db.select().from(flags).where(eq(flags.orderId, fixture.orderId))).filter((f) => f.state !== 'closed');
	expect(open).toEqual([]);
	const [rec] = await db.select().from(recommendations).where(eq(recommendations.flagId, fixture.flagId));
	expect((rec.findings as unknown[]).length).toBe(3);
});
