// The triage board and patient API, called through the route handlers against a real database:
// filters, cursor pagination, each flag action and who may take it, the 409 path, invalid bodies,
// the patient view and the concentration–time projection, and the board's speed with 10,000 flags.
import { isHttpError } from '@sveltejs/kit';
import { eq } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { getActiveRuleSet } from '../../../../src/lib/server/rules';
import { getDb } from '../../../../src/lib/server/db';
import { assessments, flagEvents, flags, users, auditLog, orders, prescribers, recommendations } from '../../../../src/lib/server/db/schema';
import { accessFor, isAllowed } from '../../../../src/lib/server/auth/access';
import * as flagsRoute from '../../../../src/routes/api/v1/flags/+server';
import * as flagRoute from '../../../../src/routes/api/v1/flags/[id]/+server';
import * as eventsRoute from '../../../../src/routes/api/v1/flags/[id]/events/+server';
import * as patientRoute from '../../../../src/routes/api/v1/patients/[id]/+server';
import * as projectionRoute from '../../../../src/routes/api/v1/patients/[id]/projection/+server';
import { createPatient, createWardRound } from '../../../fixtures/board';
import type { BoardPage, BoardRow } from '../../../../src/lib/flags/board';

// These tests call the route handlers without the hooks that tell the board cache about a user's own
// writes, so they read the board uncached; the cache has its own test (board-cache.test.ts).
process.env.EBBLINE_BOARD_CACHE = 'off';

type Who = App.SessionUser | null;
const people: Record<'farrow' | 'wren' | 'sol' | 'okafor', App.SessionUser> = {} as never;
let round: Awaited<ReturnType<typeof createWardRound>>;
const TAG = 'T6';

// eslint-disable-next-line @typescript-eslint/no-explicit-any
type Handler = (event: any) => Promise<Response> | Response;

async function call(handler: Handler, who: Who, path: string, options: { params?: Record<string, string>; body?: unknown } = {}) {
	const url = new URL(path, 'http://ebbline.test');
	const post = options.body !== undefined;
	const request = new Request(url, {
		method: post ? 'POST' : 'GET',
		headers: post ? { 'content-type': 'application/json' } : {},
		body: post ? (typeof options.body === 'string' ? options.body : JSON.stringify(options.body)) : undefined
	});
	const locals = { requestId: 'test-request', user: who, sessionId: null, feedToken: null };
	try {
		const response = await handler({ locals, url, params: options.params ?? {}, request, route: { id: null } });
		return { status: response.status, body: await response.json() };
	} catch (error) {
		if (isHttpError(error)) return { status: error.status, body: error.body as unknown as Record<string, unknown> };
		throw error;
	}
}

const board = (who: Who, query = '') => call(flagsRoute.GET, who, `/api/v1/flags${query}`);
const detail = (who: Who, id: string) => call(flagRoute.GET, who, `/api/v1/flags/${id}`, { params: { id } });
const post = (who: Who, id: string, body: unknown) => call(eventsRoute.POST, who, `/api/v1/flags/${id}/events`, { params: { id }, body });
const version = async (id: string) => (await getDb().select({ v: flags.version }).from(flags).where(eq(flags.id, id)))[0].v;

beforeAll(async () => {
	const db = getDb();
	const made = await db
		.insert(users)
		.values([
			{ email: 'farrow@larkspur.test', displayName: 'Imogen Farrow', role: 'pharmacist', passwordHash: 'not-used' },
			{ email: 'wren@larkspur.test', displayName: 'Tobias Wren', role: 'pharmacist', passwordHash: 'not-used' },
			{ email: 'sol@larkspur.test', displayName: 'Marguerite Sol', role: 'admin', passwordHash: 'not-used' },
			{ email: 'okafor@larkspur.test', displayName: 'Dr Anselm Okafor-Lind', role: 'physician', passwordHash: 'not-used' }
		])
		.returning();
	for (const u of made) {
		const key = u.email.split('@')[0] as keyof typeof people;
		people[key] = { id: u.id, email: u.email, displayName: u.displayName, role: u.role };
	}
	round = await createWardRound(db, TAG, { claimedBy: people.wren.id });
	// Dr Okafor-Lind prescribed the vancomycin: a physician reads the patients they prescribe for
	await db.update(orders).set({ prescriberId: people.okafor.id }).where(eq(orders.id, round.vanc.orderId));
});

describe('GET /api/v1/flags', () => {
	it('lists open, awake flags by priority, highest first, with the columns the board shows', async () => {
		const { status, body } = await board(people.farrow);
		expect(status).toBe(200);
		const page = body as BoardPage;
		// closed (99) and asleep (40) are left out; the snooze that ended (20) is back on the list
		expect(page.rows.map((r) => r.priority)).toEqual([92, 80, 64, 55, 31, 20]);
		expect(page.total).toBe(6);
		expect(page.nextCursor).toBeNull();
		const top = page.rows[0];
		expect(top.patient).toMatchObject({ mrn: `LB${TAG}01`, ward: `3 North Medicine ${TAG}`, bed: '12A', sex: 'female' });
		expect(top.order).toMatchObject({ agentName: 'Vancomycin', doseMg: 1250, intervalH: 12, infusionH: 1.5 });
		// CrCl fell with creatinine 0.8 → 2.1 mg/dL; the numbers come from the stored assessment
		expect(top.crclStartMlMin).toBeGreaterThan(top.crclNowMlMin!);
		expect(top.crclNowMlMin).toBeCloseTo(round.vanc.latest.renal.crclMlMin!, 6);
		expect(top.weightBasis).toBe(round.vanc.latest.covariates.weightBasis);
		expect(top.albuminGL).toBe(28);
		expect(top.halfLifeNowH).toBeGreaterThan(top.halfLifeStartH!);
		const ended = page.rows.find((r) => r.priority === 20)!;
		expect(ended.state).toBe('snoozed');
		expect(ended.snoozeEnded).toBe(true);
		const claimed = page.rows.find((r) => r.priority === 64)!;
		expect(claimed.assignee).toEqual({ id: people.wren.id, name: 'Tobias Wren' });
	});

	it('filters by ward, severity, rule, agent, state, assignee and text', async () => {
		const ids = async (q: string) => ((await board(people.farrow, q)).body as BoardPage).rows.map((r: BoardRow) => r.priority);
		expect(await ids(`?ward=${encodeURIComponent(`3 North Medicine ${TAG}`)}`)).toEqual([92, 64]);
		expect(await ids('?severity=high')).toEqual([92, 80]);
		expect(await ids('?severity=moderate,low')).toEqual([64, 55, 31, 20]);
		expect(await ids('?rule=dose_above_band')).toEqual([80, 64]);
		expect(await ids('?agent=J01DH02')).toEqual([55, 31]);
		expect(await ids('?agent=meropenem')).toEqual([55, 31]);
		expect(await ids('?state=snoozed')).toEqual([40, 20]);
		expect(await ids('?state=closed')).toEqual([99]);
		expect(await ids('?state=in_review')).toEqual([64]);
		expect(await ids('?state=all')).toEqual([99, 92, 80, 64, 55, 40, 31, 20]);
		expect(await ids('?mine=1')).toEqual([]);
		expect((await board(people.wren, '?mine=1')).body.rows.map((r: BoardRow) => r.priority)).toEqual([64]);
		expect(await ids('?q=penhallow')).toEqual([55, 31]);
		expect(await ids(`?q=LB${TAG}04`)).toEqual([80, 20]);
		expect(await ids('?q=vancomycin')).toEqual([92]);
		expect(await ids('?q=unbound fraction')).toEqual([55]);
		expect(await ids('?q=100%25')).toEqual([]); // a literal "%" is searched for, not a wildcard
		expect(await ids(`?ward=${encodeURIComponent(`ICU ${TAG}`)}&severity=low`)).toEqual([31]);
	});

	it('walks every page with a cursor, in the same order as one long page, for each sort', async () => {
		for (const sort of ['priority', 'age', 'patient', 'ward', 'agent', 'crcl', 'halfLife', 'state']) {
			for (const dir of ['asc', 'desc']) {
				const whole = (await board(people.farrow, `?state=all&sort=${sort}&dir=${dir}&limit=200`)).body as BoardPage;
				const walked: string[] = [];
				let cursor: string | null = null;
				let pages = 0;
				do {
					const { status, body } = await board(people.farrow, `?state=all&sort=${sort}&dir=${dir}&limit=3${cursor ? `&cursor=${cursor}` : ''}`);
					expect(status).toBe(200);
					walked.push(...(body as BoardPage).rows.map((r) => r.id));
					cursor = (body as BoardPage).nextCursor;
					pages += 1;
				} while (cursor && pages < 10);
				expect(walked, `${sort} ${dir}`).toEqual(whole.rows.map((r) => r.id));
				expect(new Set(walked).size).toBe(8);
			}
		}
		const byAge = (await board(people.farrow, '?sort=age&dir=desc')).body as BoardPage;
		expect(byAge.rows.map((r) => r.priority)).toEqual([20, 80, 64, 92, 31, 55]); // oldest first
	});

	it("answers for named orders: their flags, and each order's newest assessment whether flagged or not", async () => {
		const newest = async (assessmentId: string) =>
			(await getDb().select({ at: assessments.at, result: assessments.result }).from(assessments).where(eq(assessments.id, assessmentId)))[0];
		const vanc = await newest(round.vanc.assessmentIds.at(-1)!);
		const closed = await newest(round.closed.assessmentIds.at(-1)!);
		const unknown = '00000000-0000-4000-8000-000000000000';
		const { status, body } = await board(people.farrow, `?order=${round.closed.orderId},${round.vanc.orderId.toUpperCase()},${unknown}`);
		expect(status).toBe(200);
		const page = body as BoardPage;
		// the closed order's flag is not open: only the vancomycin order has a row
		expect(page.rows.map((r) => r.priority)).toEqual([92]);
		expect(page.total).toBe(1);
		const row = page.rows[0];
		expect(row.order.id).toBe(round.vanc.orderId);
		expect(row.assessedAt).toBe(vanc.at.toISOString());
		// the newest creatinine the assessment used was drawn 6 h ago; this patient has no albumin
		expect(row.creatinineAt).toBe(new Date(round.vanc.latest.creatinine.latestAt!).toISOString());
		expect(row.creatinineAt).toBe(new Date(vanc.result.creatinine.latestAt!).toISOString());
		expect(row.albuminAt).toBe(round.vanc.latest.albumin.latestAt ? new Date(round.vanc.latest.albumin.latestAt).toISOString() : null);
		// each named order's newest assessment, flagged or not; the unknown id is left out
		const byId = new Map((page.orders ?? []).map((o) => [o.id, o]));
		expect([...byId.keys()].sort()).toEqual([round.closed.orderId, round.vanc.orderId].sort());
		expect(byId.get(round.vanc.orderId)).toEqual({
			id: round.vanc.orderId,
			assessedAt: row.assessedAt,
			creatinineAt: row.creatinineAt,
			albuminAt: row.albuminAt
		});
		expect(byId.get(round.closed.orderId)).toMatchObject({
			assessedAt: closed.at.toISOString(),
			creatinineAt: new Date(closed.result.creatinine.latestAt!).toISOString()
		});
		// other filters still apply; the closed flag shows with state=all
		expect((await board(people.farrow, `?order=${round.closed.orderId}&state=all`)).body.rows.map((r: BoardRow) => r.priority)).toEqual([99]);
		expect((await board(people.farrow, `?order=${round.vanc.orderId}&severity=low`)).body.rows).toEqual([]);
		// without the filter the answer has no orders list, and the rows carry the same times
		const all = (await board(people.farrow)).body as BoardPage;
		expect(all.orders).toBeUndefined();
		expect(all.rows.find((r) => r.order.id === round.vanc.orderId)?.creatinineAt).toBe(row.creatinineAt);
	});

	it('counts flags opened since the last load for the "n new" notice', async () => {
		const first = (await board(people.farrow)).body as BoardPage;
		const none = await board(people.farrow, `?openedAfter=${encodeURIComponent(first.asOf)}`);
		expect(none.body).toMatchObject({ newCount: 0 });
		await createPatient(getDb(), {
			mrn: `LB${TAG}06`,
			givenName: 'Ferdinand',
			familyName: `Lowenna ${TAG}`,
			sex: 'male',
			birthDate: '1980-02-02',
			ward: `ICU ${TAG}`,
			bed: '7',
			heightCm: 181,
			weightKg: 77,
			creatinine: [{ hoursAgo: 2, mgDl: 1.1 }],
			agentCode: 'J01DE01',
			order: { doseMg: 2000, intervalH: 8, infusionH: 0.5, startHoursAgo: 12 },
			flags: [{ ruleKey: 'crcl_drop', severity: 'low', priority: 10, finding: `Fresh flag (${TAG}).`, openedHoursAgo: 0 }]
		});
		const one = await board(people.farrow, `?openedAfter=${encodeURIComponent(first.asOf)}`);
		expect(one.body).toMatchObject({ newCount: 1 });
		const inIcu = await board(people.farrow, `?ward=${encodeURIComponent(`ICU ${TAG}`)}&openedAfter=${encodeURIComponent(first.asOf)}`);
		expect(inIcu.body).toMatchObject({ newCount: 1 });
		const inRenal = await board(people.farrow, `?ward=${encodeURIComponent(`Renal Unit ${TAG}`)}&openedAfter=${encodeURIComponent(first.asOf)}`);
		expect(inRenal.body).toMatchObject({ newCount: 0 });
	});

	it('offers the wards, rules and agents that have open flags', async () => {
		const { body } = await board(people.farrow, '?facets=1');
		expect(body.facets.wards).toEqual(expect.arrayContaining([`3 North Medicine ${TAG}`, `ICU ${TAG}`, `Renal Unit ${TAG}`]));
		expect(body.facets.wards).not.toContain(`5 South Surgery ${TAG}`); // only a closed flag there
		const rules = body.facets.rules as { key: string; title: string }[];
		const activeTitles = new Map((await getActiveRuleSet()).rules.map((r) => [r.key, r.title]));
		expect(rules.map((r) => r.key)).toEqual(expect.arrayContaining(['arc', 'crcl_drop', 'dose_above_band', 'low_albumin', 'stale_creatinine']));
		// a rule of the active set is offered by its title; a key no longer in it stands for itself
		for (const r of rules) expect(r.title).toBe(activeTitles.get(r.key) ?? r.key);
		expect(body.facets.agents.map((a: { code: string }) => a.code)).toContain('J01XA01');
	});

	it('answers 400 naming the field for a bad query', async () => {
		for (const [query, field] of [
			['?limit=5000', 'limit'],
			['?limit=abc', 'limit'],
			['?sort=colour', 'sort'],
			['?dir=up', 'dir'],
			['?state=asleep', 'state'],
			['?severity=urgent', 'severity'],
			['?openedAfter=yesterday', 'openedAfter'],
			['?cursor=not-a-cursor', 'cursor'],
			['?order=not-an-order', 'order'],
			[`?order=${Array.from({ length: 201 }, (_, i) => `00000000-0000-4000-8000-${String(i).padStart(12, '0')}`).join(',')}`, 'order']
		]) {
			const { status, body } = await board(people.farrow, query);
			expect(status, query).toBe(400);
			expect(Object.keys(body.issues), query).toContain(field);
			expect(body.error).toContain(field);
		}
		// a cursor from another sort is refused rather than misread
		const page = (await board(people.farrow, '?limit=2')).body as BoardPage;
		const other = await board(people.farrow, `?limit=2&sort=patient&cursor=${page.nextCursor}`);
		expect(other.status).toBe(400);
	});

	it('is for pharmacists and administrators only', async () => {
		expect((await board(people.sol)).status).toBe(200);
		expect((await board(people.okafor)).status).toBe(403);
		expect((await board(null)).status).toBe(401);
		// and the deny-by-default guard in hooks agrees
		const locals = (user: Who) => ({ requestId: 'x', user, sessionId: null, feedToken: null }) as App.Locals;
		for (const route of ['/board', '/flags/[id]', '/api/v1/flags', '/api/v1/flags/[id]', '/api/v1/flags/[id]/events']) {
			expect(isAllowed(accessFor(route), locals(people.farrow)), route).toBe(true);
			expect(isAllowed(accessFor(route), locals(people.sol)), route).toBe(true);
			expect(isAllowed(accessFor(route), locals(people.okafor)), route).toBe(false);
			expect(isAllowed(accessFor(route), locals(null)), route).toBe(false);
		}
		for (const route of ['/patients/[id]', '/api/v1/patients/[id]', '/api/v1/patients/[id]/projection']) {
			expect(isAllowed(accessFor(route), locals(people.okafor)), route).toBe(true);
			expect(isAllowed(accessFor(route), locals(null)), route).toBe(false);
		}
	});
});

describe('GET /api/v1/flags/[id]', () => {
	it('gives the finding, facts, the full trace, the proposed regimen, events, version and actions', async () => {
		const id = round.vanc.flagIds[0];
		const { status, body } = await detail(people.farrow, id);
		expect(status).toBe(200);
		expect(body.finding).toContain('fell by more than half');
		expect(body.facts).toMatchObject({ albuminGL: 28 });
		expect(body.version).toBe(1);
		expect(body.patient).toMatchObject({ mrn: `LB${TAG}01`, ward: `3 North Medicine ${TAG}`, heightCm: 163, weightKg: 71 });
		expect(body.assessment.trace.length).toBe(round.vanc.latest.trace.length);
		const crcl = body.assessment.trace.find((s: { key: string }) => s.key === 'crcl');
		expect(crcl).toMatchObject({ unit: 'mL/min' });
		expect(crcl.source).toContain('Cockcroft');
		expect(crcl.inputs.length).toBeGreaterThan(0);
		expect(body.assessment.result.dosing.proposed).toEqual(round.vanc.latest.dosing.proposed);
		expect(body.proposed).toEqual(round.vanc.latest.dosing.proposed);
		expect(body.caution).toContain('population kinetics');
		expect(body.caution).toContain('example data');
		expect(body.availableActions).toEqual(expect.arrayContaining(['claim', 'start_review', 'snooze', 'note', 'recommend', 'close']));
		expect(body.availableActions).not.toContain('release');
		expect(body.events).toEqual([]);
	});

	it('answers 404 for an unknown flag, 400 for a malformed id, 403 for a physician', async () => {
		expect((await detail(people.farrow, '00000000-0000-4000-8000-000000000000')).status).toBe(404);
		const bad = await detail(people.farrow, 'flag-1');
		expect(bad.status).toBe(400);
		expect(bad.body.issues).toHaveProperty('id');
		expect((await detail(people.okafor, round.vanc.flagIds[0])).status).toBe(403);
	});
});

describe('POST /api/v1/flags/[id]/events', () => {
	it('claims, notes, starts review, snoozes, wakes, releases and closes, each bumping the version and leaving an event and an audit row', async () => {
		const id = round.mero.flagIds[0];
		let v = await version(id);
		const step = async (body: Record<string, unknown>, expectState: string) => {
			const res = await post(people.farrow, id, { ...body, expectedVersion: v });
			expect(res.status, JSON.stringify(res.body)).toBe(200);
			expect(res.body.flag.state).toBe(expectState);
			expect(res.body.flag.version).toBe(v + 1);
			v = res.body.flag.version;
			return res.body.flag;
		};
		expect((await step({ action: 'claim' }, 'new')).assignee).toEqual({ id: people.farrow.id, name: 'Imogen Farrow' });
		await step({ action: 'note', note: 'Checked the ICU chart: on CRRT? no.' }, 'new');
		await step({ action: 'start_review' }, 'in_review');
		await step({ action: 'snooze', until: new Date(Date.now() + 4 * 3_600_000).toISOString() }, 'snoozed');
		await step({ action: 'wake' }, 'in_review');
		await step({ action: 'snooze', untilNextResult: true }, 'snoozed');
		await step({ action: 'wake' }, 'in_review');
		const released = await step({ action: 'release' }, 'new');
		expect(released.assignee).toBeNull();
		const closed = await step({ action: 'close', outcome: 'accepted' }, 'closed');
		expect(closed.outcome).toBe('accepted');
		expect(closed.availableActions).toEqual([]);

		const events = (await detail(people.farrow, id)).body.events;
		expect(events.map((e: { kind: string }) => e.kind)).toEqual([
			'claimed',
			'note',
			'review_started',
			'snoozed',
			'woke',
			'snoozed',
			'woke',
			'released',
			'closed'
		]);
		expect(events[1]).toMatchObject({ note: 'Checked the ICU chart: on CRRT? no.', actor: 'Imogen Farrow' });
		const audits = await getDb().select({ action: auditLog.action }).from(auditLog).where(eq(auditLog.objectId, id));
		expect(audits.length).toBe(9);
		// acting on a closed flag is a conflict
		const again = await post(people.farrow, id, { action: 'claim', expectedVersion: v });
		expect(again.status).toBe(409);
	});

	it('answers 409 with who changed the flag and how when the version is stale, and overwrites nothing', async () => {
		const id = round.vanc.flagIds[0];
		const loaded = await version(id);
		const first = await post(people.wren, id, { action: 'claim', expectedVersion: loaded });
		expect(first.status).toBe(200);
		const second = await post(people.farrow, id, { action: 'claim', expectedVersion: loaded });
		expect(second.status).toBe(409);
		expect(second.body.error).toContain('Tobias Wren');
		expect(second.body.conflict).toMatchObject({ version: loaded + 1, by: 'Tobias Wren', what: 'claimed' });
		const [row] = await getDb().select().from(flags).where(eq(flags.id, id));
		expect(row.assignedTo).toBe(people.wren.id);
		expect(row.version).toBe(loaded + 1);
		const kinds = await getDb().select({ kind: flagEvents.kind }).from(flagEvents).where(eq(flagEvents.flagId, id));
		expect(kinds).toEqual([{ kind: 'claimed' }]);
	});

	it('keeps a claimed flag to its owner: another pharmacist cannot release it, an administrator can', async () => {
		const id = round.vanc.flagIds[0]; // claimed by Wren above
		const byFarrow = await post(people.farrow, id, { action: 'release', expectedVersion: await version(id) });
		expect(byFarrow.status).toBe(422);
		expect(byFarrow.body.error).toMatch(/claimed/);
		const snoozeByFarrow = await post(people.farrow, id, { action: 'snooze', untilNextResult: true, expectedVersion: await version(id) });
		expect(snoozeByFarrow.status).toBe(422);
		const detailForSol = (await detail(people.sol, id)).body;
		expect(detailForSol.availableActions).toContain('release');
		const bySol = await post(people.sol, id, { action: 'release', expectedVersion: await version(id) });
		expect(bySol.status).toBe(200);
		expect(bySol.body.flag.assignee).toBeNull();
	});

	it('lets no physician and no anonymous caller act', async () => {
		const id = round.pip.flagIds[0];
		const v = await version(id);
		expect((await post(people.okafor, id, { action: 'claim', expectedVersion: v })).status).toBe(403);
		expect((await post(null, id, { action: 'claim', expectedVersion: v })).status).toBe(401);
		expect(await version(id)).toBe(v);
	});

	it('answers 400 naming the field for an invalid body', async () => {
		const id = round.pip.flagIds[0];
		const v = await version(id);
		const cases: [unknown, string][] = [
			['{not json', 'body'],
			[{ expectedVersion: v }, 'action'],
			[{ action: 'recommend', expectedVersion: v }, 'action'],
			[{ action: 'claim' }, 'expectedVersion'],
			[{ action: 'claim', expectedVersion: 'one' }, 'expectedVersion'],
			[{ action: 'snooze', expectedVersion: v }, 'until'],
			[{ action: 'snooze', until: '2020-01-01T00:00:00Z', expectedVersion: v }, 'until'],
			[{ action: 'snooze', until: 'tomorrow', expectedVersion: v }, 'until'],
			[{ action: 'note', note: '   ', expectedVersion: v }, 'note'],
			[{ action: 'close', outcome: 'declined', expectedVersion: v }, 'reason'],
			[{ action: 'close', outcome: 'superseded', reason: 'x', expectedVersion: v }, 'outcome']
		];
		for (const [body, field] of cases) {
			const res = await post(people.farrow, id, body);
			expect(res.status, JSON.stringify(body)).toBe(400);
			expect(Object.keys(res.body.issues), JSON.stringify(body)).toContain(field);
		}
		expect(await version(id)).toBe(v);
		expect((await post(people.farrow, '00000000-0000-4000-8000-000000000000', { action: 'claim', expectedVersion: 1 })).status).toBe(404);
	});

	it('closes with a reason when the outcome is not accepted', async () => {
		const id = round.pip.flagIds[0];
		const res = await post(people.farrow, id, {
			action: 'close',
			outcome: 'declined',
			reason: 'Prescriber prefers to keep the dose for 24 h.',
			expectedVersion: await version(id)
		});
		expect(res.status).toBe(200);
		expect(res.body.flag).toMatchObject({ state: 'closed', outcome: 'declined' });
		const events = (await detail(people.farrow, id)).body.events;
		expect(events.at(-1)).toMatchObject({ kind: 'closed', note: 'Prescriber prefers to keep the dose for 24 h.', data: { outcome: 'declined' } });
	});
});

describe('patients', () => {
	it('shows a physician only the patients they prescribe for or were sent a recommendation about', async () => {
		const db = getDb();
		const p = round.gent;
		const read = async () => ({
			page: (await call(patientRoute.GET, people.okafor, `/api/v1/patients/${p.patientId}`, { params: { id: p.patientId } })).status,
			projection: (
				await call(projectionRoute.GET, people.okafor, `/api/v1/patients/${p.patientId}/projection?order=${p.orderId}`, { params: { id: p.patientId } })
			).status
		});
		// not theirs: answered as if there were no such patient
		expect(await read()).toEqual({ page: 404, projection: 404 });
		expect((await call(patientRoute.GET, people.farrow, `/api/v1/patients/${p.patientId}`, { params: { id: p.patientId } })).status).toBe(200);
		// a recommendation addressed to their e-mail makes the patient theirs to read
		const [rec] = await db
			.insert(recommendations)
			.values({
				flagId: p.flagIds[0],
				pharmacistId: people.farrow.id,
				recipientEmail: people.okafor.email.toUpperCase(),
				recipientName: 'Dr Anselm Okafor-Lind',
				message: 'Visibility test.',
				current: {},
				proposed: {},
				keyNumbers: {},
				tokenHash: `visibility-${p.patientId}`,
				tokenExpiresAt: new Date(Date.now() + 3_600_000)
			})
			.returning({ id: recommendations.id });
		expect(await read()).toEqual({ page: 200, projection: 200 });
		await db.delete(recommendations).where(eq(recommendations.id, rec.id));
		expect(await read()).toEqual({ page: 404, projection: 404 });
		// so does an order they prescribed, through the prescriber directory
		const [pr] = await db.insert(prescribers).values({ name: 'Dr Anselm Okafor-Lind', email: people.okafor.email }).returning({ id: prescribers.id });
		await db.update(orders).set({ practitionerId: pr.id }).where(eq(orders.id, p.orderId));
		expect(await read()).toEqual({ page: 200, projection: 200 });
		await db.update(orders).set({ practitionerId: null }).where(eq(orders.id, p.orderId));
	});

	it('gives a physician the patient view: header, orders with the latest assessment, labs, renal history, flags', async () => {
		const { status, body } = await call(patientRoute.GET, people.okafor, `/api/v1/patients/${round.vanc.patientId}`, { params: { id: round.vanc.patientId } });
		expect(status).toBe(200);
		expect(body.patient).toMatchObject({ mrn: `LB${TAG}01`, sex: 'female', ward: `3 North Medicine ${TAG}`, bed: '12A', heightCm: 163, weightKg: 71 });
		expect(body.patient.body.idealBodyWeightKg).toBeCloseTo(round.vanc.latest.covariates.idealBodyWeightKg!, 6);
		expect(body.patient.body.dosingWeightKg).toBeCloseTo(round.vanc.latest.covariates.dosingWeightKg!, 6);
		expect(body.orders).toHaveLength(1);
		expect(body.orders[0]).toMatchObject({ status: 'active', doseMg: 1250, agent: { name: 'Vancomycin' } });
		expect(body.orders[0].latest.crclMlMin).toBeCloseTo(round.vanc.latest.renal.crclMlMin!, 6);
		expect(body.orders[0].target.band.lowMgL).toBeCloseTo(400 / 24, 6);
		expect(body.labs.creatinine.map((l: { value: number }) => l.value)).toEqual([0.8, 1.4, 2.1]);
		expect(body.labs.albumin.map((l: { value: number }) => l.value)).toEqual([28]);
		expect(body.renal.length).toBe(round.vanc.assessmentIds.length);
		expect(body.renal.at(-1).egfrIndexed).toBeGreaterThan(0);
		expect(body.flags.map((f: { finding: string }) => f.finding)).toEqual([expect.stringContaining('fell by more than half')]);
	});

	it('answers 404 for an unknown patient and 400 for a malformed id', async () => {
		const unknown = '00000000-0000-4000-8000-000000000000';
		expect((await call(patientRoute.GET, people.farrow, `/api/v1/patients/${unknown}`, { params: { id: unknown } })).status).toBe(404);
		expect((await call(patientRoute.GET, people.farrow, '/api/v1/patients/x', { params: { id: 'x' } })).status).toBe(400);
		expect((await call(patientRoute.GET, null, `/api/v1/patients/${unknown}`, { params: { id: unknown } })).status).toBe(401);
	});

	it('projects the current regimen against the proposed one over 72 h with the target window', async () => {
		const p = round.vanc;
		const { status, body } = await call(projectionRoute.GET, people.okafor, `/api/v1/patients/${p.patientId}/projection?order=${p.orderId}`, {
			params: { id: p.patientId }
		});
		expect(status).toBe(200);
		// creatinine 0.8 → 2.1 mg/dL: doses follow kinetic GFR, below 20 mL/min, where vancomycin is level-guided
		// (agent library; Rybak MJ et al., Am J Health-Syst Pharm 2020;77:835–864): no proposed series, and the reason is kept
		expect(body.series.map((s: { key: string }) => s.key)).toEqual(['start', 'current']);
		expect(body.proposedFrom).toBeNull();
		expect(p.latest.renal.dosingCrclMlMin!).toBeLessThan(20);
		expect(p.latest.dosing.proposalReason).toContain('level-guided');
		const current = body.series[1];
		expect(current.points).toHaveLength(72 / 0.25 + 1);
		expect(current.points[0]).toEqual({ tH: 0, mgL: 0 });
		expect(current.points.at(-1).tH).toBe(72);
		expect(current.kinetics.kPerH).toBeCloseTo(p.latest.kinetics.now!.kPerH, 9);
		// the predicted steady-state peak of the order equals the assessment's (same Sawchuk–Zaske formula)
		expect(current.peakMgL).toBeCloseTo(p.latest.kinetics.peakMgL!, 6);
		// Rybak 2020 (from memory): AUC24 400–600 mg·h/L → average concentration 16.7–25 mg/L
		expect(body.target.band.lowMgL).toBeCloseTo(16.667, 3);
		expect(body.target.band.highMgL).toBeCloseTo(25, 6);
		// AUC-guided: no trough ceiling of its own (same source)
		expect(body.target.troughMaxMgL).toBeNull();
		expect(body.caution).toContain('population kinetics');
		expect(body.exampleParameters).toContain('example data');
	});

	it('projects a regimen the pharmacist types in', async () => {
		const p = round.vanc;
		const { status, body } = await call(
			projectionRoute.GET,
			people.farrow,
			`/api/v1/patients/${p.patientId}/projection?order=${p.orderId}&dose=1000&interval=24&infusion=2`,
			{
				params: { id: p.patientId }
			}
		);
		expect(status).toBe(200);
		expect(body.proposedFrom).toBe('typed');
		expect(body.series[2].regimen).toEqual({ doseMg: 1000, intervalH: 24, infusionH: 2 });
		// one-compartment identity (F10): AUC24 = daily dose / CL
		expect(body.series[2].auc24MgHL).toBeCloseTo(1000 / body.series[2].kinetics.clearanceLPerH, 6);
	});

	it('answers 400 naming the field for a bad projection query, 404 for an order of another patient', async () => {
		const p = round.vanc;
		const q = (query: string, id = p.patientId) => call(projectionRoute.GET, people.farrow, `/api/v1/patients/${id}/projection${query}`, { params: { id } });
		for (const [query, field] of [
			['', 'order'],
			[`?order=${p.orderId}&dose=1000`, 'interval'],
			[`?order=${p.orderId}&dose=-5&interval=12`, 'dose'],
			[`?order=${p.orderId}&dose=1000&interval=12&infusion=13`, 'infusion'],
			[`?order=${p.orderId}&dose=lots&interval=12`, 'dose']
		]) {
			const res = await q(query);
			expect(res.status, query).toBe(400);
			expect(Object.keys(res.body.issues), query).toContain(field);
		}
		const other = await q(`?order=${round.gent.orderId}`);
		expect(other.status).toBe(404);
		expect(other.body.issues).toHaveProperty('order');
	});
});
