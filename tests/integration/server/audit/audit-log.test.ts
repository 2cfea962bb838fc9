import { isHttpError } from '@sveltejs/kit';
import { eq, sql } from 'drizzle-orm';
import Papa from 'papaparse';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { auditLog as auditLogService } from '../../../../src/lib/server/audit';
import { createDatabase, getDb, type Database } from '../../../../src/lib/server/db';
import { auditLog } from '../../../../src/lib/server/db/schema';
import { load } from '../../../../src/routes/admin/audit/+page.server';
import { GET as exportLog } from '../../../../src/routes/admin/audit/export/+server';

const TZ = 'Europe/London';
const admin = { id: null as unknown as string, email: 'audit-admin@larkspur.test', displayName: 'Audit Admin', role: 'admin' as const };
const locals = (role: 'admin' | 'pharmacist' = 'admin') => ({ user: { ...admin, role }, requestId: 'req-audit-test', sessionId: null, feedToken: null });

/** Twelve rows at known times (January 2026: London = UTC), inserted in time order so ids follow time. */
const ROWS = [
	{ at: '2026-01-05T08:00', actorLabel: 'rx.one@larkspur.test', action: 'flag.claimed', objectType: 'flag', objectId: 'F-1' },
	{ at: '2026-01-05T09:00', actorLabel: 'rx.one@larkspur.test', action: 'recommendation.sent', objectType: 'recommendation', objectId: 'R-1' },
	{
		at: '2026-01-05T23:59',
		actorLabel: 'Lead.Admin@larkspur.test',
		action: 'user.role_changed',
		objectType: 'user',
		objectId: 'U-7',
		before: { role: 'physician', active: true },
		after: { role: 'pharmacist', active: true }
	},
	{ at: '2026-01-06T00:00', actorLabel: 'system', action: 'flag.superseded', objectType: 'flag', objectId: 'F-1' },
	{ at: '2026-01-06T10:30', actorLabel: 'rx.two@larkspur.test', action: 'flag.claimed', objectType: 'flag', objectId: 'F-2' },
	{
		at: '2026-01-06T11:00',
		actorLabel: 'feed token lab, "north" 100%',
		action: 'feed.received',
		objectType: 'feed_message',
		objectId: 'M-1',
		after: { note: 'comma, "quote"\nand a new line', entries: 3 }
	},
	{ at: '2026-01-07T07:00', actorLabel: 'rx.two@larkspur.test', action: 'flag.claimed', objectType: 'flag', objectId: 'F-3' },
	{ at: '2026-01-07T08:00', actorLabel: 'rx.one@larkspur.test', action: 'flag.claimed', objectType: 'flag', objectId: 'F-4' },
	{ at: '2026-01-07T09:00', actorLabel: 'Lead.Admin@larkspur.test', action: 'rules.published', objectType: 'rule_version', objectId: 'V-2' },
	{ at: '2026-01-08T12:00', actorLabel: 'rx.one@larkspur.test', action: 'flag.claimed', objectType: 'flag', objectId: 'F-5' },
	{ at: '2026-01-08T12:30', actorLabel: 'physician link', action: 'recommendation.accepted', objectType: 'recommendation', objectId: 'R-1' },
	{ at: '2026-01-09T06:00', actorLabel: '=cmd|calc', action: 'auth.sign_in_failed', objectType: 'user', objectId: null }
];
let ids: number[] = [];

beforeAll(async () => {
	process.env.EBBLINE_TIME_ZONE = TZ;
	ids = [];
	for (const r of ROWS) {
		const [row] = await getDb()
			.insert(auditLog)
			.values({ ...r, at: new Date(`${r.at}Z`), before: r.before ?? null, after: r.after ?? null })
			.returning({ id: auditLog.id });
		ids.push(row.id);
	}
});

const opts = { timeZone: TZ };
const actionsOf = (page: auditLogService.AuditPage) => page.rows.map((r) => `${r.action}:${r.objectId}`);

// The app role may not change the audit log at all (tests/integration/server/db/roles.test.ts); its
// triggers refuse even the owner role, which migrates.
describe('the audit log is append-only in the database, even for the owner role', () => {
	let owner: Database;
	beforeAll(() => {
		owner = createDatabase(process.env.DATABASE_OWNER_URL!, { max: 1 });
	});
	afterAll(async () => {
		await owner.$client.end({ timeout: 5 });
	});

	it('rejects UPDATE', async () => {
		const error = await owner.execute(sql`update audit_log set action = 'tampered' where id = ${ids[0]}`).catch((e) => e);
		expect(String(error?.cause?.message ?? error?.message)).toMatch(/append-only: UPDATE is not allowed/);
	});
	it('rejects DELETE', async () => {
		const error = await owner.execute(sql`delete from audit_log where id = ${ids[0]}`).catch((e) => e);
		expect(String(error?.cause?.message ?? error?.message)).toMatch(/append-only: DELETE is not allowed/);
	});
	it('rejects TRUNCATE', async () => {
		const error = await owner.execute(sql`truncate audit_log`).catch((e) => e);
		expect(String(error?.cause?.message ?? error?.message)).toMatch(/append-only: TRUNCATE is not allowed/);
	});
	it('leaves the rows as they were', async () => {
		const [first] = await getDb().select().from(auditLog).where(eq(auditLog.id, ids[0]));
		expect(first.action).toBe('flag.claimed');
		const [{ n }] = await getDb().execute<{ n: number }>(sql`select count(*)::int as n from audit_log where id >= ${ids[0]} and id <= ${ids[ids.length - 1]}`);
		expect(n).toBe(ROWS.length);
	});
});

describe('searching the audit log', () => {
	it('filters by action, newest first', async () => {
		const page = await auditLogService.search({ action: 'flag.claimed' }, {}, opts);
		expect(actionsOf(page)).toEqual(['flag.claimed:F-5', 'flag.claimed:F-4', 'flag.claimed:F-3', 'flag.claimed:F-2', 'flag.claimed:F-1']);
		expect(page.matching).toBe(5);
	});

	it('filters by part of the actor, in any case, with % and _ taken literally', async () => {
		expect((await auditLogService.search({ actor: 'LEAD.admin' }, {}, opts)).rows.map((r) => r.action)).toEqual(['rules.published', 'user.role_changed']);
		expect((await auditLogService.search({ actor: '%' }, {}, opts)).rows.map((r) => r.action)).toEqual(['feed.received']);
		expect((await auditLogService.search({ actor: 'rx_one' }, {}, opts)).rows).toEqual([]);
	});

	it('filters by object type and id: the history of one object', async () => {
		const page = await auditLogService.search({ objectType: 'flag', objectId: 'F-1' }, {}, opts);
		expect(actionsOf(page)).toEqual(['flag.superseded:F-1', 'flag.claimed:F-1']);
		// recommendation R-1: sent, then accepted
		expect((await auditLogService.search({ objectType: 'recommendation' }, {}, opts)).matching).toBe(2);
	});

	it('filters by a time range in the hospital zone, a date "to" covering its whole day', async () => {
		// Jan 5 (whole day) → the first three rows; Jan 6 00:00 is the next day.
		expect((await auditLogService.search({ from: '2026-01-05', to: '2026-01-05' }, {}, opts)).matching).toBe(3);
		// 2026-01-06T10:30 to 2026-01-07T07:00, both minutes included → rows 5, 6 and 7.
		const page = await auditLogService.search({ from: '2026-01-06T10:30', to: '2026-01-07T07:00' }, {}, opts);
		expect(page.rows.map((r) => r.id)).toEqual([ids[6], ids[5], ids[4]]);
		// In New York (UTC−5 in January) local 2026-01-05 is 05:00 UTC Jan 5 to 05:00 UTC Jan 6 → rows 1–4.
		expect((await auditLogService.search({ from: '2026-01-05', to: '2026-01-05' }, {}, { timeZone: 'America/New_York' })).matching).toBe(4);
	});

	it('combines filters', async () => {
		const page = await auditLogService.search({ actor: 'rx.one', action: 'flag.claimed', from: '2026-01-07T00:00' }, {}, opts);
		expect(actionsOf(page)).toEqual(['flag.claimed:F-5', 'flag.claimed:F-4']);
	});

	it('pages with keyset cursors, forwards and back', async () => {
		const range = { from: '2026-01-05', to: '2026-01-09' };
		const first = await auditLogService.search(range, { limit: 5 }, opts);
		expect(first.rows.map((r) => r.id)).toEqual(ids.slice(7).reverse());
		expect(first.newer).toBeNull();
		expect(first.older).toBe(ids[7]);
		const second = await auditLogService.search(range, { before: first.older!, limit: 5 }, opts);
		expect(second.rows.map((r) => r.id)).toEqual(ids.slice(2, 7).reverse());
		const third = await auditLogService.search(range, { before: second.older!, limit: 5 }, opts);
		expect(third.rows.map((r) => r.id)).toEqual([ids[1], ids[0]]);
		expect(third.older).toBeNull();
		const back = await auditLogService.search(range, { after: third.newer!, limit: 5 }, opts);
		expect(back.rows.map((r) => r.id)).toEqual(second.rows.map((r) => r.id));
		const top = await auditLogService.search(range, { after: back.newer!, limit: 5 }, opts);
		expect(top.rows.map((r) => r.id)).toEqual(first.rows.map((r) => r.id));
		expect(top.newer).toBeNull();
	});

	it('lists the distinct actions and object types for the filter menus', async () => {
		const actions = await auditLogService.listActions();
		expect(actions).toEqual([...new Set(actions)].sort());
		expect(actions).toEqual(expect.arrayContaining(['flag.claimed', 'rules.published', 'user.role_changed']));
		expect(await auditLogService.listObjectTypes()).toEqual(expect.arrayContaining(['feed_message', 'flag', 'recommendation', 'rule_version', 'user']));
	});
});

describe('the audit page and its CSV export', () => {
	async function callLoad(query: string, role: 'admin' | 'pharmacist' = 'admin') {
		return (await load({ locals: locals(role), url: new URL(`http://localhost/admin/audit?${query}`) } as never)) as Exclude<
			Awaited<ReturnType<typeof load>>,
			void
		>;
	}

	it('filters by the query string', async () => {
		const data = await callLoad('action=flag.claimed&actor=rx.two');
		expect(data.page?.rows.map((r: { objectId: string | null }) => r.objectId)).toEqual(['F-3', 'F-2']);
		expect(data.actions).toContain('flag.claimed');
		expect(data.exportQuery).toBe('actor=rx.two&action=flag.claimed');
	});

	it('names the field at fault for a bad filter', async () => {
		const data = await callLoad('from=2026-13-45T10:00');
		expect(data.page).toBeNull();
		expect(data.errors.from).toBe('That date does not exist.');
	});

	it('is for administrators only', async () => {
		const error = await callLoad('', 'pharmacist').catch((e) => e);
		expect(isHttpError(error) && error.status).toBe(403);
	});

	it('exports the filtered log as CSV that parses back to the same rows, and records the export', async () => {
		const response = await exportLog({ locals: locals(), url: new URL('http://localhost/admin/audit/export?from=2026-01-06&to=2026-01-06') } as never);
		expect(response.headers.get('content-disposition')).toMatch(/^attachment; filename="ebbline-audit-log-\d{4}-\d{2}-\d{2}T\d{4}\.csv"$/);
		const parsed = Papa.parse<Record<string, string>>(await response.text(), { header: true, skipEmptyLines: true });
		expect(parsed.errors).toEqual([]);
		// Jan 6 (London): rows 4, 5 and 6, newest first.
		expect(parsed.data.map((r) => Number(r.id))).toEqual([ids[5], ids[4], ids[3]]);
		const feed = parsed.data[0];
		expect(feed.actor).toBe('feed token lab, "north" 100%');
		expect(JSON.parse(feed.after)).toEqual({ note: 'comma, "quote"\nand a new line', entries: 3 });
		expect(feed['at (UTC)']).toBe('2026-01-06T11:00:00.000Z');

		const exported = await auditLogService.search({ action: 'audit_log.exported' }, {}, opts);
		expect(exported.rows).toHaveLength(1);
		expect(exported.rows[0]).toMatchObject({ actorLabel: admin.email, objectType: 'audit_log', after: { filter: { from: '2026-01-06', to: '2026-01-06' } } });
	});

	it('defuses a value a spreadsheet would run as a formula', async () => {
		const response = await exportLog({ locals: locals(), url: new URL('http://localhost/admin/audit/export?action=auth.sign_in_failed') } as never);
		const parsed = Papa.parse<Record<string, string>>(await response.text(), { header: true, skipEmptyLines: true });
		expect(parsed.data.map((r) => r.actor)).toEqual(["'=cmd|calc"]);
	});
});
