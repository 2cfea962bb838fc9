// A recommendation from compose to answer: the pharmacist sends it, the e-mail arrives in the test
// mailbox (read from EBBLINE_MAILBOX_DIR, and shown on /dev/mail), the physician's link accepts it
// without signing in, and the flag shows the outcome. Screenshots of the e-mail and the answer page.
import { expect, test, type Page } from '@playwright/test';
import { eq } from 'drizzle-orm';
import { readdirSync, readFileSync } from 'node:fs';
import path from 'node:path';
import { createDatabase, type Database } from '../../src/lib/server/db';
import { flags, users } from '../../src/lib/server/db/schema';
import { createFlag, type FlagFixture } from '../fixtures/recommendations';
import { codeFromMailbox, DEMO, signIn } from './helpers';

type Stored = { id: string; subject: string; text: string; html: string; envelopeTo: string[] };
// Each test walks several pages as three people on a shared, busy machine: give them room.
test.describe.configure({ timeout: 180_000 });
let db: Database;
let fixture: FlagFixture;

test.beforeAll(async () => {
	const url = process.env.DATABASE_URL;
	if (!url) throw new Error('DATABASE_URL is not set: run the end-to-end tests with `npm test`.');
	db = createDatabase(url, { max: 2 });
	const [physician] = await db.select({ id: users.id }).from(users).where(eq(users.email, DEMO.physician));
	fixture = await createFlag(db, { prescriberId: physician.id, ward: 'Renal Unit' });
});

test.afterAll(async () => {
	await db?.$client.end({ timeout: 5 });
});

function mailboxDir() {
	const dir = process.env.EBBLINE_MAILBOX_DIR;
	if (!dir) throw new Error('EBBLINE_MAILBOX_DIR is not set: run the end-to-end tests with `npm test`.');
	return dir;
}

/** The e-mail that names this test's patient (by MRN), once the queue has delivered it. */
async function mailFor(mrn: string): Promise<Stored> {
	let found: Stored | undefined;
	await expect
		.poll(
			() => {
				const dir = mailboxDir();
				for (const name of readdirSync(dir).filter((n) => n.endsWith('.json'))) {
					const mail = JSON.parse(readFileSync(path.join(dir, name), 'utf8')) as Stored;
					if (mail.text.includes(`MRN ${mrn}`) && mail.subject.startsWith('Dose recommendation')) found = mail;
				}
				return Boolean(found);
			},
			{ timeout: 30_000, message: 'the recommendation e-mail should arrive in the test mailbox' }
		)
		.toBe(true);
	return found!;
}

function cspViolations(page: Page) {
	const seen: string[] = [];
	page.on('console', (m) => {
		if (/Content Security Policy|Refused to/i.test(m.text())) seen.push(m.text());
	});
	return seen;
}

test('a pharmacist sends a recommendation and the physician accepts it from the e-mail link', async ({ page, browser }) => {
	// 1. the pharmacist composes from the flag: pre-filled proposal with the caution beside it
	await signIn(page, DEMO.pharmacist);
	await page.goto(`/flags/${fixture.flagId}/recommend`);
	await expect(page.getByRole('heading', { name: 'Recommendation to the prescriber' })).toBeVisible();
	await expect(page.getByLabel('Dose', { exact: true })).toHaveValue('500');
	await expect(page.getByLabel('Every')).toHaveValue('12');
	await expect(page.locator('.caution')).toContainText('population kinetics');
	await expect(page.getByLabel('Send to')).toHaveValue(/[0-9a-f-]{36}/);
	await expect(page.getByLabel('Message')).toHaveValue(/Suggest changing Meropenem from 1,000 mg IV every 8 h, infused over 0\.5 h to 500 mg every 12 h/);
	await page.screenshot({ path: 'test-results/recommendation-compose.png', fullPage: true });

	// a slip of the finger is caught and named
	await page.getByLabel('Dose', { exact: true }).fill('0');
	await page.getByRole('button', { name: 'Send recommendation' }).click();
	await expect(page.getByText('The dose must be above 0 and at most 20000 mg.')).toBeVisible();
	await page.getByLabel('Dose', { exact: true }).fill('500');
	await page.getByRole('button', { name: 'Send recommendation' }).click();
	await expect(page).toHaveURL(/\/board/);
	const [sent] = await db.select().from(flags).where(eq(flags.id, fixture.flagId));
	expect(sent.state).toBe('recommended');

	// 2. the e-mail arrives; an administrator sees it in the dev mailbox, rendered safely
	const mail = await mailFor(fixture.mrn);
	expect(mail.envelopeTo).toEqual([DEMO.physician]);
	const link = /https?:\/\/\S+\/respond\/[A-Za-z0-9_-]{43}/.exec(mail.text)?.[0];
	expect(link).toBeTruthy();
	expect(mail.text).not.toContain(fixture.familyName);

	const adminContext = await browser.newContext();
	const admin = await adminContext.newPage();
	const violations = cspViolations(admin);
	await signIn(admin, DEMO.admin);
	await admin.goto(`/dev/mail?m=${mail.id}`);
	await expect(admin.getByRole('heading', { name: 'Test mailbox' })).toBeVisible();
	const frame = admin.frameLocator('iframe[title^="E-mail"]');
	await expect(frame.getByRole('link', { name: 'Answer the recommendation' })).toBeVisible();
	await expect(frame.getByText(`MRN ${fixture.mrn}`)).toBeVisible();
	await admin.screenshot({ path: 'test-results/recommendation-email.png', fullPage: true });
	expect(violations).toEqual([]);
	await adminContext.close();

	// the same e-mail at phone width
	const phone = await browser.newContext({ viewport: { width: 390, height: 844 } });
	const phonePage = await phone.newPage();
	await phonePage.setContent(mail.html);
	expect(await phonePage.evaluate(() => document.documentElement.scrollWidth)).toBeLessThanOrEqual(390);
	await phonePage.screenshot({ path: 'test-results/recommendation-email-phone.png', fullPage: true });

	// 3. the physician follows the link on a phone, without signing in: the proposal, but not the patient
	await phonePage.goto(link!);
	await expect(phonePage.getByRole('heading', { name: 'Dose recommendation: Meropenem' })).toBeVisible();
	await expect(phonePage.locator('.caution')).toContainText('population kinetics');
	await expect(phonePage.getByText('Creatinine clearance', { exact: false }).first()).toBeVisible();
	await expect(phonePage.getByText(fixture.mrn)).toHaveCount(0);
	await expect(phonePage.getByText('Renal Unit')).toHaveCount(0);
	await expect(phonePage.getByText('Suggest changing Meropenem')).toHaveCount(0);
	await expect(phonePage.getByRole('button', { name: 'Accept the proposed regimen' })).toHaveCount(0);
	await expect(phonePage.getByRole('button', { name: 'Sign out' })).toHaveCount(0);
	await phonePage.screenshot({ path: 'test-results/respond-before-code.png', fullPage: true });

	// they ask for a code, which reaches the address the recommendation went to; a wrong one is named
	const asked = Date.now();
	await phonePage.getByRole('button', { name: 'E-mail me a code' }).click();
	await expect(phonePage.getByTestId('code-sent')).toContainText('@larkspur');
	const codeMail = await codeFromMailbox(DEMO.physician, asked);
	await phonePage.getByLabel('Code from the e-mail').fill(codeMail.code === '000000' ? '000001' : '000000');
	await phonePage.getByRole('button', { name: 'Confirm' }).click();
	await expect(phonePage.getByRole('alert')).toContainText('That code is not right. 4 tries left.');
	await phonePage.getByLabel('Code from the e-mail').fill(codeMail.code);
	await phonePage.getByRole('button', { name: 'Confirm' }).click();
	await expect(phonePage.getByText(`M.Q. · MRN ${fixture.mrn} · Renal Unit`)).toBeVisible();
	await expect(phonePage.locator('.caution')).toContainText('population kinetics');
	await phonePage.screenshot({ path: 'test-results/respond-page.png', fullPage: true });
	await phonePage.getByRole('button', { name: 'Accept the proposed regimen' }).click();
	await expect(phonePage.getByRole('heading', { name: 'This recommendation has been answered' })).toBeVisible();
	await expect(phonePage.getByRole('status')).toContainText('Your answer has been recorded');
	await phonePage.screenshot({ path: 'test-results/respond-answered.png', fullPage: true });

	// the link works once: opened again it shows the answer and nothing about the patient
	await phonePage.goto(link!);
	await expect(phonePage.getByText('Accepted', { exact: true })).toBeVisible();
	await expect(phonePage.getByText(fixture.mrn)).toHaveCount(0);
	await expect(phonePage.getByRole('button', { name: 'Accept the proposed regimen' })).toHaveCount(0);

	// an altered link shows a plain page
	const altered = link!.slice(0, -1) + (link!.endsWith('A') ? 'B' : 'A');
	const response = await phonePage.goto(altered);
	expect(response?.status()).toBe(404);
	await expect(phonePage.getByRole('heading', { name: 'This link is not valid' })).toBeVisible();
	await expect(phonePage.getByText(fixture.mrn)).toHaveCount(0);
	await phonePage.screenshot({ path: 'test-results/respond-invalid.png', fullPage: true });
	await phone.close();

	// 4. the flag shows accepted, and the pharmacist is told in the app
	const [closed] = await db.select().from(flags).where(eq(flags.id, fixture.flagId));
	expect(closed).toMatchObject({ state: 'closed', outcome: 'accepted' });
	await page.goto(`/flags/${fixture.flagId}`);
	await expect(page.getByText('Closed: Accepted')).toBeVisible();
	await expect(page.getByRole('link', { name: /Notifications \(\d+ unread\)/ })).toBeVisible();
	await page.goto('/notifications');
	await expect(page.getByText(`accepted your recommendation for Meropenem, MRN ${fixture.mrn}`)).toBeVisible();
	await page.screenshot({ path: 'test-results/notifications.png', fullPage: true });

	// 5. the dev mailbox shows the code e-mail: no patient, no drug
	const adminAgain = await browser.newContext();
	const admin2 = await adminAgain.newPage();
	await signIn(admin2, DEMO.admin);
	await admin2.goto(`/dev/mail?m=${codeMail.id}`);
	const codeFrame = admin2.frameLocator('iframe[title^="E-mail"]');
	await expect(codeFrame.getByText('Confirmation code', { exact: true }).first()).toBeVisible();
	await expect(codeFrame.getByText(codeMail.code)).toBeVisible();
	await expect(codeFrame.getByText(fixture.mrn)).toHaveCount(0);
	await adminAgain.close();
});

test('a physician answers in the app under My recommendations', async ({ page }) => {
	const [physician] = await db.select({ id: users.id }).from(users).where(eq(users.email, DEMO.physician));
	const other = await createFlag(db, { prescriberId: physician.id, ward: 'ICU' });
	const pharmacist = await page.context().browser()!.newContext();
	const pp = await pharmacist.newPage();
	await signIn(pp, DEMO.pharmacist);
	await pp.goto(`/flags/${other.flagId}/recommend`);
	await pp.getByRole('button', { name: 'Send recommendation' }).click();
	await expect(pp).toHaveURL(/\/board/);
	await pharmacist.close();

	await signIn(page, DEMO.physician);
	await expect(page.getByRole('link', { name: /recommendations? waits? for your answer/ })).toBeVisible();
	await page.goto('/recommendations');
	const item = page.getByRole('listitem').filter({ hasText: `MRN ${other.mrn}` });
	await expect(item).toBeVisible();
	await item.getByText('Decline, with a reason').click();
	await item.getByRole('button', { name: 'Decline the recommendation' }).click();
	// the reason is required (the browser asks first; without it the server names the field)
	await expect(item.getByLabel('Reason (required)')).toBeFocused();
	await item.getByLabel('Reason (required)').fill('Levels are due this afternoon; will adjust then.');
	await item.getByRole('button', { name: 'Decline the recommendation' }).click();
	await expect(page.getByRole('status')).toContainText('Your answer was recorded');
	const row = page.getByRole('row').filter({ hasText: other.mrn });
	await expect(row).toContainText('Declined');
	await expect(row).toContainText('Levels are due this afternoon');
	await page.screenshot({ path: 'test-results/my-recommendations.png', fullPage: true });
	const [closed] = await db.select().from(flags).where(eq(flags.id, other.flagId));
	expect(closed).toMatchObject({ state: 'closed', outcome: 'declined' });
});
