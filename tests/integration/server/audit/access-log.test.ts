// The access log against a real database: each read site (pages, APIs, the recommendation form, an
// answer link) writes one row with the right kind, patient and actor; a physician refused a patient
// and a role refused a page are on record; filters, paging, the CSV export and the append-only trigger.
import { isHttpError, isRedirect } from '@sveltejs/kit';
import { and, desc, eq, sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it, onTestFinished, vi } from 'vitest';
import { accessLog } from '../../../../src/lib/server/audit';
import { hashToken } from '../../../../src/lib/server/auth';
import { requireRole } from '../../../../src/lib/server/auth/access';
import { createDatabase, getDb } from '../../../../src/lib/server/db';
import { accessLog as accessLogTable, auditLog, recommendations } from '../../../../src/lib/server/db/schema';
import { getBoss, QUEUES, stopBoss } from '../../../../src/lib/server/queue';
import * as recs from '../../../../src/lib/server/recommendations';
import * as patientPage from '../../../../src/routes/patients/[id]/+page.server';
import * as patientApi from '../../../../src/routes/api/v1/patients/[id]/+server';
import * as projectionApi from '../../../../src/routes/api/v1/patients/[id]/projection/+server';
import * as flagPage from '../../../../src/routes/flags/[id]/+page.server';
import * as flagApi from '../../../../src/routes/api/v1/flags/[id]/+server';
import * as composePage from '../../../../src/routes/flags/[id]/recommend/+page.server';
import * as respondPage from '../../../../src/routes/respond/[token]/+page.server';
import * as accessPage from '../../../../src/routes/admin/access/+page.server';
import * as accessExport from '../../../../src/routes/admin/access/export/+server';
import { createFlag, createUser, type FlagFixture } from '../../../fixtures/recommendations';

type Who = App.SessionUser | null;
type User = Awaited<ReturnType<typeof createUser>>;
let pharmacist: User;
let admin: User;
let physician: User;
let otherPhysician: User;
let mine: FlagFixture; // the physician prescribed this patient's order
let theirs: FlagFixture; // nobody sent this physician anything about this patient
const TOKEN = 'A'.repeat(20) + 'access-log-test-token-0'; // 43 characters, the shape of a real link token
let recommendationId: string;

const person = (u: User): App.SessionUser => ({ id: u.id, email: u.email, displayName: u.displayName, role: u.role });
let counter = 0;

// eslint-disable-next-line @typescript-eslint/no-explicit-any
type Fn = (event: any) => unknown;

/** Calls a load or a handler the way SvelteKit would; each call has its own request id to find its rows by. */
async function call(fn: Fn, who: Who, path: string, params: Record<string, string> = {}) {
	const requestId = `access-test-${++counter}`;
	const url = new URL(path, 'http://ebbline.test');
	const locals = { requestId, user: who, sessionId: null, feedToken: null, denied: false };
	const cookies = { get: () => undefined, set: () => {}, delete: () => {}, getAll: () => [] };
	const event = { locals, url, params, cookies, request: new Request(url), route: { id: null }, setHeaders: () => {} };
	let status: number;
	try {
		const out = await fn(event);
		status = out instanceof Response ? out.status : 200;
	} catch (err) {
		if (isHttpError(err) || isRedirect(err)) status = err.status;
		else throw err;
	}
	await accessLog.settled();
	const rows = await getDb().select().from(accessLogTable).where(eq(accessLogTable.requestId, requestId));
	return { status, rows };
}

beforeAll(async () => {
	process.env.EBBLINE_LOG = 'silent';
	const db = getDb();
	pharmacist = await createUser(db, 'pharmacist', 'Hesper Quillan');
	admin = await createUser(db, 'admin', 'Odile Marchbank');
	physician = await createUser(db, 'physician', 'Dr Caius Ferrand');
	otherPhysician = await createUser(db, 'physician', 'Dr Linnea Stroud');
	mine = await createFlag(db, { prescriberId: physician.id });
	theirs = await createFlag(db, { prescriberId: otherPhysician.id });
	// a recommendation sent the ordinary way (its e-mail waits in the queue; no worker runs here); its
	// link token is then set to one the test knows
	await (await getBoss()).createQueue(QUEUES.mailSend);
	const ctx = await recs.composeContext(mine.flagId);
	if (!ctx?.proposed) throw new Error('the fixture should have a proposed regimen');
	const sent = await recs.send(
		mine.flagId,
		{ ...ctx.proposed, recipient: `physician:${physician.id}`, message: ctx.draft, version: ctx.flag.version },
		{ ...person(pharmacist), requestId: null }
	);
	if (!sent.ok) throw new Error(sent.error);
	recommendationId = sent.recommendationId;
	await db
		.update(recommendations)
		.set({ tokenHash: hashToken(TOKEN) })
		.where(eq(recommendations.id, recommendationId));
});

afterAll(async () => {
	await stopBoss();
});

describe('reads are recorded where patient data is shown', () => {
	it('the patient page, the patient API and the projection each write one row', async () => {
		const page = await call(patientPage.load, person(pharmacist), `/patients/${mine.patientId}`, { id: mine.patientId });
		expect(page.status).toBe(200);
		expect(page.rows).toHaveLength(1);
		expect(page.rows[0]).toMatchObject({
			kind: 'patient',
			objectId: mine.patientId,
			patientId: mine.patientId,
			actorId: pharmacist.id,
			actorLabel: pharmacist.email,
			role: 'pharmacist',
			route: '/patients/[id]',
			status: 200
		});

		const api = await call(patientApi.GET, person(admin), `/api/v1/patients/${mine.patientId}`, { id: mine.patientId });
		expect(api.status).toBe(200);
		expect(api.rows.map((r) => [r.kind, r.patientId, r.actorLabel, r.role, r.status])).toEqual([['patient_api', mine.patientId, admin.email, 'admin', 200]]);

		const projection = await call(projectionApi.GET, person(pharmacist), `/api/v1/patients/${mine.patientId}/projection?order=${mine.orderId}`, {
			id: mine.patientId
		});
		expect(projection.status).toBe(200);
		expect(projection.rows.map((r) => [r.kind, r.patientId, r.route])).toEqual([['projection', mine.patientId, '/api/v1/patients/[id]/projection']]);
	});

	it('the flag page, the flag API and the recommendation form record the flag with its patient', async () => {
		for (const [fn, kind, route] of [
			[flagPage.load, 'flag', '/flags/[id]'],
			[flagApi.GET, 'flag_api', '/api/v1/flags/[id]'],
			[composePage.load, 'recommendation_compose', '/flags/[id]/recommend']
		] as const) {
			const got = await call(fn, person(pharmacist), `/flags/${theirs.flagId}`, { id: theirs.flagId });
			expect(got.status, kind).toBe(200);
			expect(got.rows.map((r) => [r.kind, r.objectId, r.patientId, r.actorLabel, r.route, r.status])).toEqual([
				[kind, theirs.flagId, theirs.patientId, pharmacist.email, route, 200]
			]);
		}
	});

	it('an answer link is recorded as the link, with the patient: before the second key as such, and once the recipient is known', async () => {
		// whoever holds the link sees the proposal without the patient; the read is on record all the same
		const before = await call(respondPage.load, null, `/respond/${TOKEN}`, { token: TOKEN });
		expect(before.status).toBe(200);
		expect(before.rows).toHaveLength(1);
		expect(before.rows[0]).toMatchObject({
			kind: 'answer_link',
			objectId: recommendationId,
			patientId: mine.patientId,
			actorId: null,
			actorLabel: 'answer link',
			role: null,
			route: '/respond/[token] (before confirmation)'
		});
		// the physician it was sent to, signed in, needs no code and sees the patient
		const confirmed = await call(respondPage.load, person(physician), `/respond/${TOKEN}`, { token: TOKEN });
		expect(confirmed.status).toBe(200);
		expect(confirmed.rows.map((r) => [r.kind, r.objectId, r.patientId, r.actorId, r.route])).toEqual([
			['answer_link', recommendationId, mine.patientId, physician.id, '/respond/[token]']
		]);
		// the link's secret never reaches the log
		expect(JSON.stringify([...before.rows, ...confirmed.rows])).not.toContain(TOKEN);
	});

	it('a link that opens nothing, an unknown patient and an unknown flag are not reads', async () => {
		const unknown = '00000000-0000-4000-8000-0000000000aa';
		expect(await call(respondPage.load, null, `/respond/${'B'.repeat(43)}`, { token: 'B'.repeat(43) })).toEqual({ status: 404, rows: [] });
		expect(await call(patientPage.load, person(pharmacist), `/patients/${unknown}`, { id: unknown })).toEqual({ status: 404, rows: [] });
		expect(await call(patientApi.GET, person(pharmacist), `/api/v1/patients/${unknown}`, { id: unknown })).toEqual({ status: 404, rows: [] });
		expect(await call(flagPage.load, person(pharmacist), `/flags/${unknown}`, { id: unknown })).toEqual({ status: 404, rows: [] });
		expect(await call(flagApi.GET, person(pharmacist), `/api/v1/flags/${unknown}`, { id: unknown })).toEqual({ status: 404, rows: [] });
		expect(await call(patientApi.GET, person(pharmacist), '/api/v1/patients/not-an-id', { id: 'not-an-id' })).toEqual({ status: 400, rows: [] });
	});

	it('a physician reads their own patient, and asking for another is recorded as refused (404)', async () => {
		const own = await call(patientPage.load, person(physician), `/patients/${mine.patientId}`, { id: mine.patientId });
		expect(own.status).toBe(200);
		expect(own.rows.map((r) => [r.kind, r.status, r.role])).toEqual([['patient', 200, 'physician']]);

		const refused = await call(patientPage.load, person(physician), `/patients/${theirs.patientId}`, { id: theirs.patientId });
		expect(refused.status).toBe(404);
		expect(refused.rows.map((r) => [r.kind, r.patientId, r.actorLabel, r.status])).toEqual([['patient', theirs.patientId, physician.email, 404]]);

		const api = await call(patientApi.GET, person(physician), `/api/v1/patients/${theirs.patientId}`, { id: theirs.patientId });
		expect(api.status).toBe(404);
		expect(api.rows.map((r) => [r.kind, r.status])).toEqual([['patient_api', 404]]);

		const projection = await call(projectionApi.GET, person(physician), `/api/v1/patients/${theirs.patientId}/projection?order=${theirs.orderId}`, {
			id: theirs.patientId
		});
		expect(projection.status).toBe(404);
		expect(projection.rows.map((r) => [r.kind, r.status])).toEqual([['projection', 404]]);
	});
});

describe('refusals by the role guard', () => {
	it('a 403 from the guard is recorded with who was refused', async () => {
		const got = await call(flagPage.load, person(physician), `/flags/${mine.flagId}`, { id: mine.flagId });
		expect(got.status).toBe(403);
		expect(got.rows).toHaveLength(1);
		// called outside a request here, so the guard cannot name the route (the end-to-end test checks it does in the app)
		expect(got.rows[0]).toMatchObject({
			kind: 'denied',
			status: 403,
			actorId: physician.id,
			actorLabel: physician.email,
			role: 'physician',
			objectId: null,
			patientId: null,
			route: 'outside a request'
		});

		const api = await call(accessExport.GET, person(pharmacist), '/admin/access/export', {});
		expect(api.status).toBe(403);
		expect(api.rows.map((r) => [r.kind, r.status, r.actorLabel])).toEqual([['denied', 403, pharmacist.email]]);
	});

	it('not signed in is a 401 and no refusal row', async () => {
		expect(await call(flagApi.GET, null, `/api/v1/flags/${mine.flagId}`, { id: mine.flagId })).toEqual({ status: 401, rows: [] });
	});

	it('a refusal that cannot be written is logged and the 403 still stands', async () => {
		process.env.EBBLINE_LOG = 'on';
		const lines: string[] = [];
		const spy = vi.spyOn(process.stderr, 'write').mockImplementation((chunk: string | Uint8Array) => {
			lines.push(String(chunk));
			return true;
		});
		try {
			// an account id that does not exist: the row's foreign key refuses it
			const ghost = { id: '00000000-0000-4000-8000-0000000000ff', email: 'ghost@larkspur.test', displayName: 'Nobody', role: 'physician' as const };
			const locals = { requestId: 'access-test-ghost', user: ghost, sessionId: null, feedToken: null, denied: false };
			let status = 0;
			try {
				requireRole(locals, 'admin');
			} catch (err) {
				if (isHttpError(err)) status = err.status;
			}
			expect(status).toBe(403);
			await accessLog.settled();
		} finally {
			spy.mockRestore();
			process.env.EBBLINE_LOG = 'silent';
		}
		const logged = lines.map((l) => JSON.parse(l)).find((l) => l.message === 'access log: refusal not recorded');
		expect(logged).toMatchObject({ level: 'error', requestId: 'access-test-ghost' });
		expect(await getDb().select().from(accessLogTable).where(eq(accessLogTable.requestId, 'access-test-ghost'))).toEqual([]);
	});
});

describe('reading the log', () => {
	// rows at known times (hospital zone Europe/London, summer time: UTC+1)
	const at = (iso: string) => new Date(iso);
	let ids: number[] = [];
	const labels = ['filter-a@larkspur.test', 'filter-b@larkspur.test'];

	beforeAll(async () => {
		const base = { route: '/patients/[id]', requestId: 'filter-fixture' };
		const made = await getDb()
			.insert(accessLogTable)
			.values([
				{
					...base,
					at: at('2031-06-01T22:30:00Z'),
					actorLabel: labels[0],
					role: 'pharmacist',
					kind: 'patient',
					objectId: mine.patientId,
					patientId: mine.patientId,
					status: 200
				},
				{
					...base,
					at: at('2031-06-02T08:00:00Z'),
					actorLabel: labels[0],
					role: 'pharmacist',
					kind: 'flag',
					objectId: mine.flagId,
					patientId: mine.patientId,
					status: 200
				},
				{
					...base,
					at: at('2031-06-02T09:15:00Z'),
					actorLabel: labels[1],
					role: 'physician',
					kind: 'patient',
					objectId: theirs.patientId,
					patientId: theirs.patientId,
					status: 404
				},
				{
					...base,
					at: at('2031-06-02T23:30:00Z'),
					actorLabel: labels[1],
					role: 'physician',
					kind: 'denied',
					objectId: null,
					patientId: null,
					route: '/board',
					status: 403
				},
				{
					...base,
					at: at('2031-06-03T10:00:00Z'),
					actorLabel: '=HYPERLINK("http://evil.example")',
					role: null,
					kind: 'answer_link',
					objectId: recommendationId,
					patientId: mine.patientId,
					route: '/respond/[token]',
					status: 200
				}
			])
			.returning({ id: accessLogTable.id });
		ids = made.map((r) => r.id);
	});

	const tz = { timeZone: 'Europe/London' };
	const find = async (filter: accessLog.AccessFilter) =>
		(await accessLog.search({ ...filter, from: filter.from ?? '2031-06-01' }, {}, tz)).rows.map((r) => ids.indexOf(r.id));

	it('filters by actor, kind, patient (MRN or id) and outcome, newest first, with the MRN joined', async () => {
		expect(await find({})).toEqual([4, 3, 2, 1, 0]);
		expect(await find({ actor: 'FILTER-A' })).toEqual([1, 0]);
		expect(await find({ actor: '%' })).toEqual([]); // a literal %, not a wildcard
		expect(await find({ kind: 'patient' })).toEqual([2, 0]);
		expect(await find({ patient: mine.mrn })).toEqual([4, 1, 0]);
		expect(await find({ patient: mine.mrn.toLowerCase() })).toEqual([4, 1, 0]);
		expect(await find({ patient: theirs.patientId })).toEqual([2]);
		expect(await find({ patient: 'LB-NOSUCH' })).toEqual([]);
		expect(await find({ outcome: 'refused' })).toEqual([3, 2]);
		expect(await find({ outcome: 'read' })).toEqual([4, 1, 0]);
		const page = await accessLog.search({ from: '2031-06-01', to: '2031-06-03' }, {}, tz);
		expect(page.rows.find((r) => r.id === ids[2])?.patientMrn).toBe(theirs.mrn);
		expect(page.rows.find((r) => r.id === ids[3])?.patientMrn).toBeNull();
	});

	it('reads from and to as local dates and times in the hospital zone', async () => {
		// 22:30Z on 1 June is 23:30 on 1 June in London; 23:30Z on 2 June is already 3 June there
		expect(await find({ from: '2031-06-01', to: '2031-06-01' })).toEqual([0]);
		expect(await find({ from: '2031-06-02', to: '2031-06-02' })).toEqual([2, 1]);
		expect(await find({ from: '2031-06-03', to: '2031-06-03' })).toEqual([4, 3]);
		expect(await find({ from: '2031-06-02T09:00', to: '2031-06-02T10:15' })).toEqual([2, 1]);
		expect(await find({ from: '2031-06-02T10:16', to: '2031-06-02T10:16' })).toEqual([]);
	});

	it('pages newest first by keyset, both ways, with a count of what matches', async () => {
		const filter = { from: '2031-06-01' };
		const first = await accessLog.search(filter, { limit: 2 }, tz);
		expect(first.rows.map((r) => ids.indexOf(r.id))).toEqual([4, 3]);
		expect([first.newer, first.matching, first.matchingCapped]).toEqual([null, 5, false]);
		const second = await accessLog.search(filter, { before: first.older!, limit: 2 }, tz);
		expect(second.rows.map((r) => ids.indexOf(r.id))).toEqual([2, 1]);
		const third = await accessLog.search(filter, { before: second.older!, limit: 2 }, tz);
		expect(third.rows.map((r) => ids.indexOf(r.id))).toEqual([0]);
		expect(third.older).toBeNull();
		const back = await accessLog.search(filter, { after: third.newer!, limit: 2 }, tz);
		expect(back.rows.map((r) => ids.indexOf(r.id))).toEqual([2, 1]);
		const top = await accessLog.search(filter, { after: back.newer!, limit: 2 }, tz);
		expect(top.rows.map((r) => ids.indexOf(r.id))).toEqual([4, 3]);
		expect(top.newer).toBeNull();
	});

	it('bad filters name the field', () => {
		const bad = accessLog.parseQuery(new URLSearchParams({ kind: 'everything', patient: 'LB 1; drop', from: '2031-02-30', outcome: 'maybe' }));
		expect(bad.ok).toBe(false);
		if (bad.ok) return;
		expect(Object.keys(bad.errors).sort()).toEqual(['from', 'kind', 'outcome', 'patient']);
		expect(bad.errors.kind).toMatch(/^Kind must be one of/);
		expect(bad.errors.patient).toMatch(/^Patient must be an MRN or a patient id/);
		expect(bad.errors.from).toBe('That date does not exist.'); // 30 February, which JavaScript would roll over
		const reversed = accessLog.parseQuery(new URLSearchParams({ from: '2031-06-03', to: '2031-06-01' }));
		expect(reversed.ok ? null : reversed.errors.to).toBe('The end must be on or after the start.');
	});

	it('the page is for administrators and shows the filtered rows or the fields at fault', async () => {
		const ok = (await accessPage.load({
			locals: { requestId: 'page', user: person(admin), sessionId: null, feedToken: null, denied: false },
			url: new URL(`http://ebbline.test/admin/access?patient=${mine.mrn}&kind=flag&from=2031-06-01`)
		} as never)) as Awaited<ReturnType<typeof accessPage.load>> & { page: accessLog.AccessPage };
		expect(ok.page.rows.map((r) => [r.id, r.patientMrn])).toEqual([[ids[1], mine.mrn]]);
		const bad = (await accessPage.load({
			locals: { requestId: 'page', user: person(admin), sessionId: null, feedToken: null, denied: false },
			url: new URL('http://ebbline.test/admin/access?kind=nonsense')
		} as never)) as { page: unknown; errors: Record<string, string> };
		expect(bad.page).toBeNull();
		expect(Object.keys(bad.errors)).toEqual(['kind']);
		const refused = await call(accessPage.load, person(pharmacist), '/admin/access');
		expect(refused.status).toBe(403);
	});

	it('the CSV export has every matching row, neutralises formulas, joins the MRN and is itself audited', async () => {
		const url = new URL('http://ebbline.test/admin/access/export?from=2031-06-01');
		const locals = { requestId: 'export-1', user: person(admin), sessionId: null, feedToken: null, denied: false };
		const response = await accessExport.GET({ locals, url } as never);
		expect(response.status).toBe(200);
		expect(response.headers.get('content-type')).toBe('text/csv; charset=utf-8');
		expect(response.headers.get('content-disposition')).toMatch(/^attachment; filename="ebbline-access-log-.*\.csv"$/);
		const lines = (await response.text())
			.replace(/^\ufeff/, '')
			.trimEnd()
			.split('\r\n');
		expect(lines[0]).toBe('id,at (UTC),actor,actor id,role,kind,object id,patient MRN,patient id,route,status,request id');
		expect(lines).toHaveLength(6);
		// newest first: the answer-link row whose actor label looks like a formula
		expect(lines[1]).toBe(
			`${ids[4]},2031-06-03T10:00:00.000Z,"'=HYPERLINK(""http://evil.example"")",,,answer_link,${recommendationId},${mine.mrn},${mine.patientId},/respond/[token],200,filter-fixture`
		);
		expect(lines[3]).toBe(
			`${ids[2]},2031-06-02T09:15:00.000Z,${labels[1]},,physician,patient,${theirs.patientId},${theirs.mrn},${theirs.patientId},/patients/[id],404,filter-fixture`
		);
		const [audit] = await getDb()
			.select()
			.from(auditLog)
			.where(and(eq(auditLog.action, 'access_log.exported'), eq(auditLog.requestId, 'export-1')));
		expect(audit).toMatchObject({ actorId: admin.id, actorLabel: admin.email, objectType: 'access_log', after: { filter: { from: '2031-06-01' } } });

		const bad = await call(accessExport.GET, person(admin), '/admin/access/export?kind=nonsense');
		expect(bad.status).toBe(400);
	});

	it('exports a long log in batches without losing or repeating a row', async () => {
		const seen: number[] = [];
		for await (const batch of accessLog.exportRows({ from: '2031-06-01' }, { ...tz, batch: 2 })) {
			expect(batch.length).toBeLessThanOrEqual(2);
			seen.push(...batch.map((r) => ids.indexOf(r.id)));
		}
		expect(seen).toEqual([4, 3, 2, 1, 0]);
	});
});

describe('the access log is append-only', () => {
	// as the owner role, which runs the retention: the app role has no UPDATE, DELETE or TRUNCATE here at all
	it('refuses UPDATE, DELETE of a recent row and TRUNCATE even to the owner; removes a row older than 400 days', async () => {
		const db = createDatabase(process.env.DATABASE_OWNER_URL!, { max: 1 });
		onTestFinished(() => db.$client.end({ timeout: 5 }));
		const [row] = await db.select({ id: accessLogTable.id }).from(accessLogTable).orderBy(desc(accessLogTable.id)).limit(1);
		await expect(db.update(accessLogTable).set({ actorLabel: 'someone else' }).where(eq(accessLogTable.id, row.id))).rejects.toThrow();
		await expect(db.execute(sql`update access_log set actor_label = 'someone else' where id = ${row.id}`)).rejects.toMatchObject({
			cause: expect.objectContaining({ message: expect.stringContaining('access_log is append-only: UPDATE is not allowed') })
		});
		await expect(db.delete(accessLogTable).where(eq(accessLogTable.id, row.id))).rejects.toThrow();
		await expect(db.execute(sql`truncate access_log`)).rejects.toThrow();
		const [old] = await db
			.insert(accessLogTable)
			.values({ at: new Date(Date.now() - 401 * 86_400_000), actorLabel: 'retention test', kind: 'patient', route: '/patients/[id]', status: 200 })
			.returning({ id: accessLogTable.id });
		await db.delete(accessLogTable).where(eq(accessLogTable.id, old.id));
		expect(await db.select().from(accessLogTable).where(eq(accessLogTable.id, old.id))).toEqual([]);
		expect(await db.select({ id: accessLogTable.id }).from(accessLogTable).where(eq(accessLogTable.id, row.id))).toHaveLength(1);
	});
});
