// No silent mail loss and nothing waiting forever, in the browser: a recommendation to an address the
// relay refuses appears on the administrator's Failed e-mail page, where the physician's answer taken by
// telephone is recorded (the note is required for a decline) and closes the flag; a pharmacist withdraws
// another recommendation from the flag page, and its e-mail link then says why, with nothing to answer.
import { expect as baseExpect, test, type Page } from '@playwright/test';
import { eq } from 'drizzle-orm';
import { readdirSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { createDatabase, type Database } from '../../src/lib/server/db';
import { flags, orders, outboundEmails, prescribers, recommendations } from '../../src/lib/server/db/schema';
import { uniqueTag } from '../fixtures/board';
import { createFlag, type FlagFixture } from '../fixtures/recommendations';
import { DEMO, signIn } from './helpers';

const expect = baseExpect.configure({ timeout: 20_000 });
test.describe.configure({ timeout: 180_000 });

const TAG = uniqueTag().toLowerCase();
let db: Database;

test.beforeAll(async () => {
	const url = process.env.DATABASE_URL;
	if (!url) throw new Error('DATABASE_URL is not set: run the end-to-end tests with `npm test`.');
	db = createDatabase(url, { max: 2 });
});

test.afterAll(async () => {
	await db?.$client.end({ timeout: 5 });
});

/** A flag whose order names a prescriber in the directory with this address. */
async function flagFor(name: string, email: string): Promise<FlagFixture> {
	const [prescriber] = await db.insert(prescribers).values({ name, email }).returning({ id: prescribers.id });
	const fixture = await createFlag(db, { prescriberId: null, ward: `5 South Surgery ${TAG}` });
	await db.update(orders).set({ practitionerId: prescriber.id, prescriberName: name }).where(eq(orders.id, fixture.orderId));
	return fixture;
}

async function recommend(page: Page, fixture: FlagFixture) {
	await page.goto(`/flags/${fixture.flagId}/recommend`);
	await page.getByRole('button', { name: 'Send recommendation' }).click();
	await expect(page).toHaveURL(/\/board/);
	const [rec] = await db.select().from(recommendations).where(eq(recommendations.flagId, fixture.flagId));
	return rec;
}

function mailTo(address: string) {
	const dir = process.env.EBBLINE_MAILBOX_DIR;
	if (!dir) throw new Error('EBBLINE_MAILBOX_DIR is not set: run the end-to-end tests with `npm test`.');
	return readdirSync(dir)
		.filter((n) => n.endsWith('.json'))
		.map((n) => JSON.parse(readFileSync(path.join(dir, n), 'utf8')) as { envelopeTo: string[]; subject: string; text: string })
		.find((m) => m.envelopeTo.includes(address) && m.subject.startsWith('Dose recommendation'));
}

test('an administrator records an answer taken by telephone for a recommendation the relay refused', async ({ page, browser }) => {
	const address = `no-such-mailbox-${TAG}@larkspur.test`;
	const fixture = await flagFor(`Dr Rowena Tregear ${TAG}`, address);
	await signIn(page, DEMO.pharmacist);
	const rec = await recommend(page, fixture);
	await expect
		.poll(async () => (await db.select({ status: outboundEmails.status }).from(outboundEmails).where(eq(outboundEmails.relatedId, rec.id)))[0]?.status, {
			timeout: 30_000
		})
		.toBe('undeliverable');

	const adminPage = await (await browser.newContext()).newPage();
	await signIn(adminPage, DEMO.admin);
	await adminPage.getByRole('link', { name: 'Failed e-mail' }).click();
	await expect(adminPage.getByRole('heading', { name: 'Failed e-mail', level: 1 })).toBeVisible();
	const row = adminPage.getByTestId('failed-email').filter({ hasText: address });
	await expect(row).toContainText('550');
	await expect(row).toContainText(`MRN ${fixture.mrn}`);
	await expect(row.getByRole('link', { name: 'Open the flag' })).toHaveAttribute('href', `/flags/${fixture.flagId}`);

	// by keyboard: open the telephone answer, choose Declined, submit without the reason
	await row.getByText('Answered by telephone…').focus();
	await adminPage.keyboard.press('Enter');
	await row.getByRole('radio', { name: 'Declined' }).check();
	await row.getByRole('button', { name: 'Record the answer and close the flag' }).click();
	await expect(row.getByText('Write the reason the physician gave for declining')).toBeVisible();
	await row.getByRole('textbox', { name: /^Note/ }).fill('Plans to stop meropenem tomorrow after the ward round.');
	await row.getByRole('button', { name: 'Record the answer and close the flag' }).click();
	await expect(adminPage.getByText(/is recorded and the flag is closed/)).toBeVisible();
	await expect(adminPage.getByTestId('failed-email').filter({ hasText: address })).toHaveCount(0);

	const [flag] = await db.select().from(flags).where(eq(flags.id, fixture.flagId));
	expect(flag).toMatchObject({ state: 'closed', outcome: 'declined' });
	await adminPage.getByRole('link', { name: /Settled/ }).click();
	await expect(adminPage.getByTestId('failed-email').filter({ hasText: address })).toContainText('Answered by telephone');
	await adminPage.screenshot({ path: 'test-results/failed-mail-settled.png', fullPage: true });
});

test('the sender withdraws a recommendation from the flag page and the link says why', async ({ page }) => {
	const address = `piran.rosewarne.${TAG}@larkspur.test`;
	const fixture = await flagFor(`Dr Piran Rosewarne ${TAG}`, address);
	await signIn(page, DEMO.pharmacist);
	await recommend(page, fixture);
	await expect.poll(() => Boolean(mailTo(address)), { timeout: 30_000 }).toBe(true);
	const link = /https?:\/\/\S+\/respond\/[A-Za-z0-9_-]{43}/.exec(mailTo(address)!.text)![0];

	await page.goto(`/flags/${fixture.flagId}`);
	const panel = page.getByRole('region', { name: 'Recommendations' });
	await expect(panel.getByTestId('recommendation-sent')).toContainText(`Dr Piran Rosewarne ${TAG}`);
	await panel.getByText('Withdraw…').click();
	await panel.getByLabel(/^Reason/).fill('Microbiology shows a sensitive organism; switching agent.');
	await panel.getByRole('button', { name: 'Withdraw the recommendation' }).click();
	await expect(panel.getByRole('status')).toContainText('Withdrawn');
	await expect(panel.getByTestId('recommendation-withdrawn')).toContainText('switching agent');
	await expect(page.getByTestId('flag-state')).toHaveText('In review');

	await page.goto(link);
	await expect(page.getByRole('heading', { name: 'This link can no longer be used' })).toBeVisible();
	await expect(page.getByText(/withdrew this recommendation on .+\. Microbiology shows a sensitive organism; switching agent\./)).toBeVisible();
	await expect(page.getByRole('button', { name: /Accept/ })).toHaveCount(0);
});
