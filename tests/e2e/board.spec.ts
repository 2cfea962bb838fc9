// The pharmacist's morning round on the triage board, by keyboard only; the flag's trace; the patient
// view's charts; designed empty/loading/error states; accessibility; and what a physician cannot do.
// The app is shared with other specs, so this file makes its own invented patients in wards named
// with a unique tag, and filters to them.
import AxeBuilder from '@axe-core/playwright';
import { expect as baseExpect, test, type Page } from '@playwright/test';
import { eq } from 'drizzle-orm';
import { createDatabase, type Database } from '../../src/lib/server/db';
import { flags, orders, users } from '../../src/lib/server/db/schema';
import { createPatient, createWardRound, uniqueTag } from '../fixtures/board';
import { DEMO, signInByKeyboard } from './helpers';

// The machine is shared: a page can take several seconds to hydrate, so waits are generous.
const expect = baseExpect.configure({ timeout: 20_000 });
test.describe.configure({ timeout: 180_000 });

const TAG = `E${uniqueTag()}`;
const WARD = `3 North Medicine ${TAG}`;
const CROWD = `Crowd Ward ${TAG}`;
let db: Database;
let round: Awaited<ReturnType<typeof createWardRound>>;
let crowd: Awaited<ReturnType<typeof createPatient>>;

test.beforeAll(async () => {
	const url = process.env.DATABASE_URL;
	if (!url) throw new Error('DATABASE_URL is not set: run the end-to-end tests with `npm test`.');
	db = createDatabase(url, { max: 2 });
	round = await createWardRound(db, TAG);
	// one patient whose single order carries 30 flags: enough rows to fill a laptop screen
	crowd = await createPatient(db, {
		mrn: `LB${TAG}99`,
		givenName: 'Evander',
		familyName: `Pollexfen ${TAG}`,
		sex: 'male',
		birthDate: '1949-03-03',
		ward: CROWD,
		bed: '1',
		heightCm: 175,
		weightKg: 80,
		creatinine: [
			{ hoursAgo: 60, mgDl: 0.9 },
			{ hoursAgo: 5, mgDl: 1.8 }
		],
		agentCode: 'J01XA01',
		order: { doseMg: 1000, intervalH: 12, infusionH: 1, startHoursAgo: 48 },
		flags: Array.from({ length: 30 }, (_, i) => ({
			ruleKey: `crowd_rule_${String(i).padStart(2, '0')}`,
			severity: (['high', 'moderate', 'low'] as const)[i % 3],
			priority: 90 - i,
			finding: `Crowd finding ${i + 1}: vancomycin clearance fell with creatinine 0.9 → 1.8 mg/dL (${TAG}).`,
			openedHoursAgo: 1 + i / 4
		}))
	});
});

test.afterAll(async () => {
	await db?.$client.end({ timeout: 5 });
});

const boardApi = (url: URL) => url.pathname === '/api/v1/flags';
const rows = (page: Page) => page.locator('tbody tr.board-row');
/** Opens the board and waits until it has hydrated (its rows come with the page, before the keys work). */
async function openBoard(page: Page, url: string) {
	await page.goto(url);
	await expect(page.locator('table.board[data-live]')).toBeAttached();
}
const seriousOrWorse = async (page: Page) =>
	(await new AxeBuilder({ page }).withTags(['wcag2a', 'wcag2aa', 'wcag21a', 'wcag21aa']).analyze()).violations
		.filter((v) => v.impact === 'serious' || v.impact === 'critical')
		.map((v) => `${v.id}: ${v.help} (${v.nodes.map((n) => n.target.join(' ')).join(', ')})`);

async function flagRow(id: string) {
	const [row] = await db.select().from(flags).where(eq(flags.id, id));
	return row;
}

test('a pharmacist works the morning round by keyboard: filter to a ward, open a flag, read its trace, claim, snooze another, close one as accepted', async ({
	page
}) => {
	await page.setViewportSize({ width: 1280, height: 800 });
	await signInByKeyboard(page, DEMO.pharmacist);
	await expect(page.getByRole('link', { name: 'Open the triage board' })).toBeVisible();
	await openBoard(page, '/board');
	await expect(rows(page).first()).toBeVisible();
	await page.screenshot({ path: 'test-results/board.png' });

	// "/" jumps to the search box; Tab moves on to the ward filter; typing the ward's name picks it
	await page.keyboard.press('/');
	await expect(page.locator('#board-search')).toBeFocused();
	await page.keyboard.press('Tab');
	await expect(page.locator('#filter-ward')).toBeFocused();
	await page.keyboard.type(WARD);
	await page.keyboard.press('Enter'); // commits the choice if typing opened the list
	await expect(page.locator('#filter-ward')).toHaveValue(WARD);
	await expect(page).toHaveURL(new RegExp(`ward=${encodeURIComponent(WARD).replace(/%20/g, '(\\+|%20)')}`));
	await expect(rows(page)).toHaveCount(2);
	await expect(rows(page).nth(0)).toContainText(`Ashdown ${TAG}`);
	await expect(rows(page).nth(1)).toContainText(`Quayle ${TAG}`);
	await expect(rows(page).nth(0)).toContainText('◆');
	await expect(rows(page).nth(0)).toContainText('High');
	await expect(rows(page).nth(0)).toContainText('mL/min');

	// Esc leaves the filters for the rows; j/k move; Enter opens the focused flag
	await page.keyboard.press('Escape');
	// a select whose option list is open takes the first Esc to close the list
	if (
		!(await rows(page)
			.nth(0)
			.evaluate((el) => el === document.activeElement))
	)
		await page.keyboard.press('Escape');
	await expect(rows(page).nth(0)).toBeFocused();
	await page.keyboard.press('j');
	await expect(rows(page).nth(1)).toBeFocused();
	await page.keyboard.press('k');
	await expect(rows(page).nth(0)).toBeFocused();
	await page.keyboard.press('Enter');
	await expect(page).toHaveURL(new RegExp(`/flags/${round.vanc.flagIds[0]}$`));
	await expect(page.getByRole('heading', { level: 1 })).toContainText('fell by more than half');

	await page.screenshot({ path: 'test-results/flag-detail.png' });
	// the trace: every number with formula, inputs and published source
	await page.keyboard.press('t');
	await expect(page.locator('#trace')).toBeFocused();
	const crcl = page.locator('#trace-crcl');
	await expect(crcl).toContainText('Cockcroft');
	await expect(crcl).toContainText('mL/min');
	await expect(crcl).toContainText('Source:');
	await expect(crcl).toContainText('Nephron 1976');
	await expect(page.getByRole('note', { name: 'Caution about this dose' })).toContainText('population kinetics');
	await expect(page.getByRole('note', { name: 'Caution about this dose' })).toContainText('example data');
	await page.evaluate(() => document.getElementById('trace-crcl')?.scrollIntoView({ block: 'center' }));
	await page.screenshot({ path: 'test-results/flag-trace.png' });

	// c claims it
	await page.keyboard.press('c');
	await expect(page.getByRole('status').filter({ hasText: 'You claimed this flag.' })).toBeVisible();
	await expect(page.getByTestId('flag-assignee')).toContainText('Imogen Farrow');
	expect((await flagRow(round.vanc.flagIds[0])).assignedTo).not.toBeNull();

	// b returns to the board with the ward filter kept
	await page.keyboard.press('b');
	await expect(page).toHaveURL(/\/board\?.*ward=/);
	await expect(rows(page)).toHaveCount(2);
	await expect(rows(page).nth(0)).toContainText('Imogen Farrow');

	// s snoozes the second flag until the next result
	await page.keyboard.press('j');
	await page.keyboard.press('j');
	await expect(rows(page).nth(1)).toBeFocused();
	await page.keyboard.press('s');
	const snooze = page.getByRole('dialog', { name: 'Snooze flag' });
	await expect(snooze).toBeVisible();
	await expect(snooze).toContainText(`Quayle ${TAG}`);
	await page.keyboard.press('Enter');
	await expect(snooze).toBeHidden();
	await expect(page.getByRole('status').filter({ hasText: 'Snoozed until the next result' })).toBeVisible();
	await expect(rows(page)).toHaveCount(1);
	const snoozed = await flagRow(round.gent.flagIds[0]);
	expect(snoozed.state).toBe('snoozed');
	expect(snoozed.snoozeUntilNextResult).toBe(true);

	// x closes the claimed one as accepted
	await expect(rows(page).nth(0)).toBeFocused();
	await page.keyboard.press('x');
	const close = page.getByRole('dialog', { name: 'Close flag' });
	await expect(close).toBeVisible();
	await expect(close.getByRole('radio', { name: /Accepted/ })).toBeChecked();
	await page.keyboard.press('Enter');
	await expect(close).toBeHidden();
	await expect(page.getByRole('status').filter({ hasText: 'Closed as accepted' })).toBeVisible();
	await expect(page.getByText('No flags match these filters.')).toBeVisible();
	const closed = await flagRow(round.vanc.flagIds[0]);
	expect(closed.state).toBe('closed');
	expect(closed.outcome).toBe('accepted');

	// ? lists the keys; Esc closes the list
	await page.keyboard.press('?');
	const keys = page.getByRole('dialog', { name: 'Keyboard shortcuts' });
	await expect(keys).toBeVisible();
	for (const label of ['Next flag', 'Open the flag', 'Claim the flag', 'Snooze', 'Recommend', 'Close with an outcome', 'Search'])
		await expect(keys).toContainText(label);
	await page.keyboard.press('Escape');
	await expect(keys).toBeHidden();
});

test('the board fits 25+ rows on a 1280×800 laptop without sideways scrolling, and sorts by a column', async ({ page }) => {
	await page.setViewportSize({ width: 1280, height: 800 });
	await signInByKeyboard(page, DEMO.pharmacist2);
	await openBoard(page, `/board?ward=${encodeURIComponent(CROWD)}`);
	await expect(rows(page)).toHaveCount(30);
	const visible = await rows(page).evaluateAll((trs) => trs.filter((tr) => tr.getBoundingClientRect().bottom <= window.innerHeight).length);
	expect(visible).toBeGreaterThanOrEqual(25);
	const overflow = await page.evaluate(() => document.documentElement.scrollWidth - document.documentElement.clientWidth);
	expect(overflow).toBeLessThanOrEqual(0);
	await page.screenshot({ path: 'test-results/board-laptop-1280x800.png' });

	// sorting by age through the column header (a button, reached by keyboard)
	await page.getByRole('button', { name: 'Age', exact: true }).focus();
	await page.keyboard.press('Enter');
	await expect(page).toHaveURL(/sort=age/);
	await expect(rows(page).first()).toContainText('Crowd finding 30');
	// hiding a column
	await page.getByText('Columns', { exact: true }).click();
	await page.getByRole('checkbox', { name: 'MRN' }).uncheck();
	await expect(page.getByRole('columnheader', { name: 'MRN' })).toHaveCount(0);
	await page.getByRole('checkbox', { name: 'MRN' }).check();
});

test('new flags announce themselves without moving rows, and a stale action answers with who changed it', async ({ page, browser }) => {
	await page.clock.install();
	await signInByKeyboard(page, DEMO.pharmacist2);
	await openBoard(page, `/board?ward=${encodeURIComponent(`ICU ${TAG}`)}`);
	await expect(rows(page)).toHaveCount(2);
	const firstId = await rows(page).first().getAttribute('data-flag-id');
	await createPatient(db, {
		mrn: `LB${TAG}07`,
		givenName: 'Isolde',
		familyName: `Carrow ${TAG}`,
		sex: 'female',
		birthDate: '1962-12-12',
		ward: `ICU ${TAG}`,
		bed: '9',
		heightCm: 166,
		weightKg: 70,
		creatinine: [{ hoursAgo: 1, mgDl: 1.6 }],
		agentCode: 'J01DE01',
		order: { doseMg: 2000, intervalH: 8, infusionH: 0.5, startHoursAgo: 20 },
		flags: [{ ruleKey: 'crcl_drop', severity: 'high', priority: 97, finding: `New while the board was open (${TAG}).`, openedHoursAgo: -0.01 }]
	});
	await page.clock.runFor(31_000);
	const notice = page.getByRole('button', { name: /1 new flag — show/ });
	await expect(notice).toBeVisible();
	// rows did not jump under the cursor
	await expect(rows(page)).toHaveCount(2);
	expect(await rows(page).first().getAttribute('data-flag-id')).toBe(firstId);
	await notice.click();
	await expect(rows(page)).toHaveCount(3);
	await expect(rows(page).first()).toContainText(`Carrow ${TAG}`);

	// Tobias Wren opens a flag; Imogen Farrow claims it elsewhere first
	await page.goto(`/flags/${round.mero.flagIds[1]}`);
	const other = await browser.newContext();
	const otherPage = await other.newPage();
	await signInByKeyboard(otherPage, DEMO.pharmacist);
	const version = (await flagRow(round.mero.flagIds[1])).version;
	const response = await otherPage.request.post(`/api/v1/flags/${round.mero.flagIds[1]}/events`, { data: { action: 'claim', expectedVersion: version } });
	expect(response.status()).toBe(200);
	await other.close();
	await page.keyboard.press('c');
	await expect(page.getByRole('alert')).toContainText('Imogen Farrow changed this flag (claimed)');
	await expect(page.getByRole('alert')).toContainText('Nothing was overwritten');
	await expect(page.getByTestId('flag-assignee')).toContainText('Imogen Farrow');
});

test('designed empty, loading and error states', async ({ page }) => {
	await signInByKeyboard(page, DEMO.pharmacist);
	// the first page comes with the board; what the browser reads afterwards (a new sort here) can fail
	await openBoard(page, `/board?ward=${encodeURIComponent(WARD)}&state=all`);
	await expect(rows(page).first()).toBeVisible();
	// error, then retry
	let fail = true;
	let release: () => void = () => {};
	const held = new Promise<void>((resolve) => (release = resolve));
	await page.route(boardApi, async (route) => {
		if (fail)
			return route.fulfill({ status: 503, contentType: 'application/json', body: JSON.stringify({ error: 'Ebbline cannot reach its database just now' }) });
		await held;
		return route.continue();
	});
	await page.getByRole('button', { name: 'Age', exact: true }).click();
	await expect(page.getByRole('alert')).toContainText('The board could not be loaded');
	await expect(page.getByRole('alert')).toContainText('cannot reach its database');
	fail = false;
	await page.getByRole('button', { name: 'Try again' }).click();
	// loading: skeleton rows while the answer is held back
	await expect(page.locator('tr.skeleton').first()).toBeVisible();
	await expect(page.getByText('Loading flags…')).toBeVisible();
	await page.screenshot({ path: 'test-results/board-loading.png' });
	release();
	await expect(rows(page).first()).toBeVisible();
	await page.unroute(boardApi);

	// empty worklist (the shared demo hospital always has flags, so the browser's next answer is stood in for)
	await openBoard(page, '/board');
	await page.route(boardApi, (route) =>
		route.fulfill({
			status: 200,
			contentType: 'application/json',
			body: JSON.stringify({ rows: [], nextCursor: null, total: 0, asOf: new Date().toISOString(), facets: { wards: [], rules: [], agents: [] } })
		})
	);
	await page.getByRole('button', { name: 'Age', exact: true }).click();
	await expect(page.getByText('No open flags — every active order fits its patient on the latest results.')).toBeVisible();
	await expect(page.getByText('a flag appears here within half a minute')).toBeVisible();
	await page.screenshot({ path: 'test-results/board-empty.png' });
	await page.unroute(boardApi);

	// nothing matches a search
	await page.goto(`/board?q=${encodeURIComponent(`no such patient ${TAG}`)}`);
	await expect(page.getByText('No flags match these filters.')).toBeVisible();
	await expect(page.getByRole('button', { name: 'Clear filters' })).toBeVisible();
});

test('the board arrives with its first page of rows, filtered and sorted from the URL, without JavaScript', async ({ page, browser }) => {
	await signInByKeyboard(page, DEMO.pharmacist2);
	// the ward's two flags (open or not), patients Z to A: the reverse of their order by priority
	const url = `/board?ward=${encodeURIComponent(WARD)}&state=all&sort=patient&dir=desc`;
	const bare = await browser.newContext({ javaScriptEnabled: false, storageState: await page.context().storageState() });
	try {
		const plain = await bare.newPage();
		await plain.goto(url);
		await expect(rows(plain)).toHaveCount(2);
		await expect(rows(plain).nth(0)).toContainText(`Quayle ${TAG}`);
		await expect(rows(plain).nth(1)).toContainText(`Ashdown ${TAG}`);
		await expect(plain.locator('tr.skeleton')).toHaveCount(0);
		await expect(plain.getByText('2 flags match these filters')).toBeVisible();
		await expect(plain.getByRole('columnheader', { name: 'Patient' })).toHaveAttribute('aria-sort', 'descending');
		// a filter the server reads finds nothing: the designed empty state, rendered on the server too
		await plain.goto(`/board?q=${encodeURIComponent(`no such patient ${TAG}`)}`);
		await expect(plain.getByText('No flags match these filters.')).toBeVisible();
	} finally {
		await bare.close();
	}

	// with JavaScript the browser takes over those rows: it does not ask the API for them again
	const asked: string[] = [];
	await page.route(boardApi, (route) => {
		asked.push(route.request().url());
		return route.continue();
	});
	await openBoard(page, url);
	await expect(rows(page)).toHaveCount(2);
	await expect(rows(page).nth(0)).toContainText(`Quayle ${TAG}`);
	expect(asked).toEqual([]);
	await page.unroute(boardApi);
});

test('the board pages through more than 50 flags, 50 at a time, and back', async ({ page }) => {
	const ward = `Long Ward ${TAG}`;
	await createPatient(db, {
		mrn: `LB${TAG}98`,
		givenName: 'Perpetua',
		familyName: `Lanyon ${TAG}`,
		sex: 'female',
		birthDate: '1951-07-07',
		ward,
		bed: '2',
		heightCm: 160,
		weightKg: 58,
		creatinine: [
			{ hoursAgo: 60, mgDl: 0.8 },
			{ hoursAgo: 5, mgDl: 1.7 }
		],
		agentCode: 'J01XA01',
		order: { doseMg: 1000, intervalH: 12, infusionH: 1, startHoursAgo: 48 },
		flags: Array.from({ length: 55 }, (_, i) => ({
			ruleKey: `long_rule_${String(i).padStart(2, '0')}`,
			severity: 'moderate' as const,
			priority: 80 - i,
			finding: `Long finding ${i + 1} (${TAG}).`,
			openedHoursAgo: 1
		}))
	});
	await signInByKeyboard(page, DEMO.pharmacist2);
	await openBoard(page, `/board?ward=${encodeURIComponent(ward)}`);
	const pages = page.getByRole('navigation', { name: 'Board pages' });
	await expect(rows(page)).toHaveCount(50);
	await expect(pages).toContainText('Flags 1–50 of 55');
	await pages.getByRole('button', { name: 'Next 50' }).click();
	await expect(rows(page)).toHaveCount(5);
	await expect(pages).toContainText('Flags 51–55 of 55');
	await expect(rows(page).first()).toContainText('Long finding 51');
	await expect(rows(page).first()).toBeFocused();
	await expect(pages.getByRole('button', { name: 'Next 50' })).toBeDisabled();
	await pages.getByRole('button', { name: 'Previous 50' }).click();
	await expect(rows(page)).toHaveCount(50);
	await expect(rows(page).first()).toContainText('Long finding 1 ');
});

test('the patient view shows trends and the projection of the current regimen against the proposed and a typed-in one', async ({ page }) => {
	await page.setViewportSize({ width: 1440, height: 900 });
	await signInByKeyboard(page, DEMO.pharmacist);
	await page.goto(`/patients/${round.vanc.patientId}`);
	await expect(page.getByRole('heading', { level: 1 })).toContainText(`Ashdown ${TAG}, Rowena`);
	await expect(page.getByText('Ideal body weight (Devine)')).toBeVisible();
	await expect(page.getByText(`${WARD}, bed 12A`)).toBeVisible();
	for (const id of ['creatinine-chart', 'albumin-chart', 'renal-chart', 'projection-chart']) {
		await expect(page.locator(`#${id}-title`)).toBeVisible();
	}
	const projection = page.locator('section[aria-labelledby="projection-chart-title"]');
	await expect(projection.locator('svg path.lc-spline-path, svg path').first()).toBeVisible();
	const steady = page.getByRole('table', { name: 'At steady state' });
	// creatinine 0.8 → 2.1 mg/dL: doses follow kinetic GFR, below 20 mL/min, where vancomycin is level-guided (agent
	// library; Rybak 2020): no proposed series, the reason in words, and the current regimen filled in to edit
	await expect(steady.getByRole('rowheader', { name: /Current/ })).toBeVisible();
	await expect(steady.getByRole('rowheader', { name: /Proposed/ })).toHaveCount(0);
	const panel = page.locator('#projection');
	await expect(panel.getByRole('status')).toContainText('level-guided');
	await expect(panel.getByRole('note', { name: 'Caution about this dose' })).toContainText('kinetic GFR');
	await expect(page.locator('#projection-interval')).toHaveValue('12');
	// the table view carries the same numbers for screen readers
	await expect(page.getByRole('table', { name: /Concentration \(mg\/L\) every 4 h/ })).toBeAttached();
	await page.screenshot({ path: 'test-results/patient-charts.png', fullPage: true });
	await page.locator('#projection').screenshot({ path: 'test-results/patient-projection.png' });

	// a regimen the pharmacist types in
	await page.locator('#projection-dose').fill('1000');
	await page.locator('#projection-interval').fill('24');
	await page.locator('#projection-infusion').fill('2');
	await page.locator('#projection-infusion').press('Enter');
	await expect(steady.getByRole('rowheader', { name: /Typed in/ })).toContainText('1,000 mg q24h');
	// a bad value is named
	await page.locator('#projection-interval').fill('0');
	await page.locator('#projection-interval').press('Enter');
	await expect(page.locator('#projection-interval-error')).toContainText('interval');
});

test('no serious or critical accessibility violations on the board, a flag and a patient', async ({ page }) => {
	// four full-page accessibility scans: 1.1 min in a fresh-clone run on a busy two-core machine
	test.setTimeout(120_000);
	await signInByKeyboard(page, DEMO.pharmacist);
	await openBoard(page, `/board?ward=${encodeURIComponent(CROWD)}`);
	await expect(rows(page).first()).toBeVisible();
	expect(await seriousOrWorse(page)).toEqual([]);
	await page.goto(`/flags/${crowd.flagIds[0]}`);
	await expect(page.locator('#trace-crcl')).toBeVisible();
	expect(await seriousOrWorse(page)).toEqual([]);
	await page.goto(`/patients/${round.mero.patientId}`);
	await expect(page.locator('#projection-chart-title')).toBeVisible();
	expect(await seriousOrWorse(page)).toEqual([]);
	// and with a dialog open
	await openBoard(page, `/board?ward=${encodeURIComponent(CROWD)}`);
	await expect(rows(page).first()).toBeVisible();
	await page.keyboard.press('j');
	await page.keyboard.press('x');
	await expect(page.getByRole('dialog', { name: 'Close flag' })).toBeVisible();
	expect(await seriousOrWorse(page)).toEqual([]);
});

test('a physician reads the patient view but cannot reach the board or act on a flag', async ({ page }) => {
	await signInByKeyboard(page, DEMO.physician);
	await expect(page.getByRole('navigation', { name: 'Main' }).getByRole('link', { name: 'Triage board' })).toHaveCount(0);
	const board = await page.goto('/board');
	expect(board?.status()).toBe(403);
	const flagPage = await page.goto(`/flags/${round.pip.flagIds[0]}`);
	expect(flagPage?.status()).toBe(403);
	const before = (await flagRow(round.pip.flagIds[0])).version;
	const list = await page.request.get('/api/v1/flags');
	expect(list.status()).toBe(403);
	const act = await page.request.post(`/api/v1/flags/${round.pip.flagIds[0]}/events`, { data: { action: 'claim', expectedVersion: before } });
	expect(act.status()).toBe(403);
	expect((await flagRow(round.pip.flagIds[0])).version).toBe(before);

	// a physician reads only the patients they prescribe for (or were sent a recommendation about)
	const elsewhere = await page.goto(`/patients/${round.vanc.patientId}`);
	expect(elsewhere?.status()).toBe(404);
	const [doctor] = await db.select({ id: users.id }).from(users).where(eq(users.email, DEMO.physician));
	await db.update(orders).set({ prescriberId: doctor.id }).where(eq(orders.id, round.pip.orderId));
	await page.goto(`/patients/${round.pip.patientId}`);
	await expect(page.getByRole('heading', { level: 1 })).toContainText(`Marchbank ${TAG}`);
	await expect(page.getByRole('heading', { name: 'Flag history' })).toBeVisible();
	await expect(page.locator('a[href^="/flags/"]')).toHaveCount(0);
	await expect(page.getByRole('button', { name: /Claim/ })).toHaveCount(0);
});
