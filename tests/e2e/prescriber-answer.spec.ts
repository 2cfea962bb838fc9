// The order's own prescriber, who has no Ebbline account, receives the recommendation at the address
// the directory holds, answers from the e-mail's link, then sets up an account through a single-use
// link and finds the recommendation under My recommendations.
import { expect as baseExpect, test } from '@playwright/test';
import { eq } from 'drizzle-orm';
import { readdirSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { createDatabase, type Database } from '../../src/lib/server/db';
import { flags, orders, prescribers, recommendations } from '../../src/lib/server/db/schema';
import { createFlag, type FlagFixture } from '../fixtures/recommendations';
import { uniqueTag } from '../fixtures/board';
import { codeFromMailbox, DEMO, signIn } from './helpers';

const expect = baseExpect.configure({ timeout: 20_000 });
test.describe.configure({ timeout: 180_000 });

const TAG = uniqueTag().toLowerCase();
const PRESCRIBER_EMAIL = `ines.calloway.${TAG}@larkspur.test`;
let db: Database;
let fixture: FlagFixture;

test.beforeAll(async () => {
	const url = process.env.DATABASE_URL;
	if (!url) throw new Error('DATABASE_URL is not set: run the end-to-end tests with `npm test`.');
	db = createDatabase(url, { max: 2 });
	const [prescriber] = await db
		.insert(prescribers)
		.values({ name: `Dr Ines Calloway ${TAG}`, email: PRESCRIBER_EMAIL })
		.returning({ id: prescribers.id });
	fixture = await createFlag(db, { prescriberId: null, ward: `Renal Unit ${TAG}` });
	await db
		.update(orders)
		.set({ practitionerId: prescriber.id, prescriberName: `Dr Ines Calloway ${TAG}` })
		.where(eq(orders.id, fixture.orderId));
});

test.afterAll(async () => {
	await db?.$client.end({ timeout: 5 });
});

function mailbox(): { subject: string; text: string; envelopeTo: string[] }[] {
	const dir = process.env.EBBLINE_MAILBOX_DIR;
	if (!dir) throw new Error('EBBLINE_MAILBOX_DIR is not set: run the end-to-end tests with `npm test`.');
	return readdirSync(dir)
		.filter((n) => n.endsWith('.json'))
		.map((n) => JSON.parse(readFileSync(path.join(dir, n), 'utf8')));
}
const mailTo = (subjectStart: string) => mailbox().find((m) => m.envelopeTo.includes(PRESCRIBER_EMAIL) && m.subject.startsWith(subjectStart));

test('the prescriber without an account answers from the e-mail link and then sets up an account', async ({ page, browser }) => {
	await signIn(page, DEMO.pharmacist);
	await page.goto(`/flags/${fixture.flagId}/recommend`);
	const sendTo = page.getByLabel('Send to');
	await expect(sendTo.locator('option:checked')).toContainText(`Dr Ines Calloway ${TAG}`);
	await expect(sendTo.locator('option:checked')).toContainText('no account needed');
	await expect(page.getByText("The order's prescriber is chosen")).toBeVisible();
	await page.screenshot({ path: 'test-results/recommend-to-prescriber.png', fullPage: true });
	await page.getByRole('button', { name: 'Send recommendation' }).click();
	await expect(page).toHaveURL(/\/board/);
	const [rec] = await db.select().from(recommendations).where(eq(recommendations.flagId, fixture.flagId));
	expect(rec).toMatchObject({ physicianId: null, recipientEmail: PRESCRIBER_EMAIL, recipientChoice: 'prescriber' });

	// the e-mail reaches the prescriber's address
	await expect.poll(() => Boolean(mailTo('Dose recommendation')), { timeout: 30_000 }).toBe(true);
	const link = /https?:\/\/\S+\/respond\/[A-Za-z0-9_-]{43}/.exec(mailTo('Dose recommendation')!.text)![0];

	// the prescriber, not signed in, answers
	const context = await browser.newContext();
	const prescriber = await context.newPage();
	await prescriber.goto(link);
	await expect(prescriber.getByRole('heading', { name: 'Dose recommendation: Meropenem' })).toBeVisible();
	await expect(prescriber.getByText(fixture.mrn)).toHaveCount(0);
	// no account needed to confirm: the code goes to the address the recommendation went to
	const asked = Date.now();
	await prescriber.getByRole('button', { name: 'E-mail me a code' }).click();
	await expect(prescriber.getByTestId('code-sent')).toContainText('@larkspur.test');
	await prescriber.getByLabel('Code from the e-mail').fill((await codeFromMailbox(PRESCRIBER_EMAIL, asked)).code);
	await prescriber.getByRole('button', { name: 'Confirm' }).click();
	await expect(prescriber.getByText(`MRN ${fixture.mrn}`)).toBeVisible();
	await prescriber.getByRole('button', { name: 'Accept the proposed regimen' }).click();
	await expect(prescriber.getByRole('heading', { name: 'This recommendation has been answered' })).toBeVisible();
	expect((await db.select().from(flags).where(eq(flags.id, fixture.flagId)))[0]).toMatchObject({ state: 'closed', outcome: 'accepted' });

	// and asks for an account: a single-use link by e-mail
	await prescriber.getByRole('button', { name: 'Set up an Ebbline account' }).click();
	await expect(prescriber.getByTestId('setup-sent')).toContainText(PRESCRIBER_EMAIL);
	await expect.poll(() => Boolean(mailTo('Set up your Ebbline account')), { timeout: 30_000 }).toBe(true);
	const setupLink = /https?:\/\/\S+\/account\/setup\/[A-Za-z0-9_-]{43}/.exec(mailTo('Set up your Ebbline account')!.text)![0];
	await prescriber.goto(setupLink);
	await expect(prescriber.getByRole('heading', { name: 'Set up your Ebbline account' })).toBeVisible();
	await prescriber.getByLabel('Password (at least 12 characters)').fill('short');
	await prescriber.getByLabel('The same password again').fill('short');
	await prescriber.getByRole('button', { name: 'Create my account' }).click();
	await expect(prescriber.getByText('Password must be at least 12 characters.')).toBeVisible();
	await prescriber.getByLabel('Password (at least 12 characters)').fill('calloway-larkspur-2026');
	await prescriber.getByLabel('The same password again').fill('calloway-larkspur-2026');
	await prescriber.getByRole('button', { name: 'Create my account' }).click();
	await expect(prescriber).toHaveURL(/\/recommendations$/);
	await expect(prescriber.getByText(fixture.familyName).first()).toBeVisible();
	await prescriber.screenshot({ path: 'test-results/prescriber-history.png', fullPage: true });
	// the link works once
	const again = await prescriber.goto(setupLink);
	expect(again?.status()).toBe(410);
	await context.close();
});
