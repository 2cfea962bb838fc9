// The demo history played through the product's own code: a full hospital at the end, nothing dated
// after `now`, the team's work with every kind of answer, accepted changes reaching the orders through
// the feed, and the same outcome when played again from the same time.
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDatabase, getDb } from '../../../../src/lib/server/db';
import { playHistory, seedAgents, seedHospital, seedUsers, type HistorySummary } from '../../../../src/lib/server/demo';
import { seedDefaultVersion } from '../../../../src/lib/server/rules';
import { stopBoss, useJobs } from '../../../../src/lib/server/queue';
import { migrateDatabase } from '../../../../scripts/migrate';

const now = new Date('2026-11-30T09:30:00Z');
const DAYS = 8;
const db = () => getDb();
const rows = async <T>(query: ReturnType<typeof sql>) => Array.from((await db().execute(query)) as unknown as Iterable<T>);
const one = async <T>(query: ReturnType<typeof sql>) => (await rows<T>(query))[0];

async function freshDatabase() {
	// as `npm run seed -- --reset` does: the owner role drops and migrates, the app role seeds
	const owner = createDatabase(process.env.DATABASE_OWNER_URL!, { max: 1 });
	try {
		await owner.execute(sql`drop schema if exists public cascade`);
		await owner.execute(sql`drop schema if exists drizzle cascade`);
		await owner.execute(sql`drop schema if exists pgboss cascade`);
		await owner.execute(sql`create schema public`);
	} finally {
		await owner.$client.end({ timeout: 5 });
	}
	await migrateDatabase();
	await seedUsers();
	await seedDefaultVersion();
	await seedAgents();
}

/** What the history decided, without the random ids: the same for the same `now` and days. */
async function fingerprint() {
	return rows<Record<string, unknown>>(sql`
		select o.source_id, f.rule_key, f.state, f.outcome, f.opened_at, f.closed_at,
			(select string_agg(r.status || '@' || coalesce(r.responded_via, '-'), ',' order by r.created_at) from recommendations r where r.flag_id = f.id) as answers
		from flags f join orders o on o.id = f.order_id
		order by o.source_id, f.opened_at, f.rule_key`);
}

let summary: HistorySummary;
let first: Record<string, unknown>[];

beforeAll(async () => {
	await freshDatabase();
	summary = await playHistory({ days: DAYS, now });
	first = await fingerprint();
}, 180_000);
afterAll(stopBoss);

describe('playHistory', () => {
	it("ends with today's 120 inpatients; everyone admitted earlier has gone home", async () => {
		const census = await one<{ inpatients: number; discharged: number; seeded: number }>(sql`
			select count(*) filter (where e.discharged_at is null)::int as inpatients,
				count(*) filter (where e.discharged_at is not null)::int as discharged,
				count(*) filter (where e.discharged_at is null and p.source_id like 'lbh-p-%')::int as seeded
			from encounters e join patients p on p.id = e.patient_id`);
		expect(census).toMatchObject({ inpatients: 120, seeded: 120 });
		expect(census.discharged).toBeGreaterThan(20);
		expect(summary.stays).toBe(census.inpatients + census.discharged);
		// the feed quarantined nothing, and every active order has an assessment
		expect(await one(sql`select count(*)::int as n from quarantine`)).toEqual({ n: 0 });
		expect(
			await one(sql`select count(*)::int as n from orders o where o.status = 'active' and not exists (select 1 from assessments a where a.order_id = o.id)`)
		).toEqual({ n: 0 });
	});

	it('dates everything inside the period: nothing after now, nothing before its first day', async () => {
		const from = new Date(now.getTime() - DAYS * 86_400_000).toISOString();
		const spans = await rows<{ what: string; earliest: Date; latest: Date }>(sql`
			select 'assessments' as what, min(at) as earliest, max(at) as latest from assessments
			union all select 'flags opened', min(opened_at), max(opened_at) from flags
			union all select 'flag events', min(at), max(at) from flag_events
			union all select 'recommendations', min(created_at), max(coalesce(responded_at, created_at)) from recommendations
			union all select 'feed messages', min(received_at), max(received_at) from feed_messages
			union all select 'results received', min(created_at), max(created_at) from lab_results
			union all select 'e-mail', min(created_at), max(sent_at) from outbound_emails
			union all select 'notifications', min(created_at), max(coalesce(read_at, created_at)) from notifications
			union all select 'audit', min(at), max(at) from audit_log where action not like 'rules.%' and action not like 'user.%'`);
		for (const s of spans) {
			expect(new Date(s.latest).getTime(), s.what).toBeLessThanOrEqual(now.getTime());
			expect(new Date(s.earliest).getTime(), s.what).toBeGreaterThan(Date.parse(from));
		}
		// flags were raised on every day, not all at the end
		const days = await one<{ n: number }>(sql`select count(distinct date_trunc('day', opened_at))::int as n from flags`);
		expect(days.n).toBeGreaterThanOrEqual(DAYS - 1);
	});

	it('shows the team at work: claims, recommendations answered every way, reminders, notes and closures', async () => {
		const answers = await rows<{ status: string; via: string | null; n: number }>(
			sql`select status::text, responded_via as via, count(*)::int as n from recommendations group by 1, 2`
		);
		const count = (status: string, via?: string) =>
			answers.filter((a) => a.status === status && (via === undefined || a.via === via)).reduce((n, a) => n + a.n, 0);
		expect(summary.recommendations).toBeGreaterThan(20);
		expect(count('accepted')).toBeGreaterThan(count('declined'));
		expect(count('declined')).toBeGreaterThan(0);
		expect(count('modified')).toBeGreaterThan(0);
		expect(count('accepted', 'link')).toBeGreaterThan(0);
		expect(count('accepted', 'app')).toBeGreaterThan(0);
		const actions = new Map(
			(await rows<{ action: string; n: number }>(sql`select action, count(*)::int as n from audit_log group by 1`)).map((r) => [r.action, r.n])
		);
		for (const action of ['flag.claimed', 'flag.recommended', 'flag.closed', 'recommendation.sent', 'recommendation.reminded', 'feed.message_received'])
			expect(actions.get(action) ?? 0, action).toBeGreaterThan(0);
		// closed by people and by the rules; the board at the end still has work on it
		const states = await one<{ by_people: number; superseded: number; open: number }>(sql`
			select count(*) filter (where outcome in ('accepted', 'modified', 'declined', 'no_action'))::int as by_people,
				count(*) filter (where outcome = 'superseded')::int as superseded,
				count(*) filter (where state <> 'closed')::int as open
			from flags`);
		expect(states.by_people).toBeGreaterThan(20);
		expect(states.superseded).toBeGreaterThan(0);
		expect(states.open).toBeGreaterThan(10);
		// what the app told the pharmacists was read at their next round
		const unread = await one<{ n: number }>(
			sql`select count(*)::int as n from notifications where read_at is null and created_at < ${new Date(now.getTime() - 2 * 86_400_000).toISOString()}::timestamptz`
		);
		expect(unread.n).toBe(0);
		// every e-mail was delivered at its time, and no answer link is left in a stored copy
		expect(await one(sql`select count(*)::int as n from outbound_emails where status <> 'sent' or text ~ '/respond/[A-Za-z0-9_-]{43}'`)).toEqual({ n: 0 });
	});

	it('closes the loop: an accepted recommendation changes the order, through the feed, to the agreed regimen', async () => {
		const changed = await rows<{ accepted: number; matches: boolean }>(sql`
			select count(*)::int as accepted,
				bool_and((r.proposed->>'doseMg')::float8 = o.dose_mg and (r.proposed->>'intervalH')::float8 = o.interval_h) as matches
			from recommendations r join flags f on f.id = r.flag_id join orders o on o.id = f.order_id
			where r.status = 'accepted' and r.responded_via <> 'phone' and o.status = 'active' and o.updated_at > r.responded_at
				and not exists (select 1 from recommendations later join flags lf on lf.id = later.flag_id
					where lf.order_id = o.id and later.created_at > r.created_at and later.status in ('accepted', 'modified'))`);
		expect(changed[0].accepted).toBeGreaterThan(0);
		expect(changed[0].matches).toBe(true);
		// never two open flags for an order, and none for a stopped order
		expect(await one(sql`select count(*)::int as n from (select order_id from flags where state <> 'closed' group by 1 having count(*) > 1) x`)).toEqual({
			n: 0
		});
		expect(
			await one(sql`select count(*)::int as n from flags f join orders o on o.id = f.order_id where f.state <> 'closed' and o.status = 'stopped'`)
		).toEqual({ n: 0 });
	});

	it('is skipped by the seed when patients exist', async () => {
		expect((await seedHospital({ now, days: DAYS })).skipped).toBe(true);
	});

	it('plays the same history again from the same time', async () => {
		await stopBoss();
		await freshDatabase();
		// pg-boss's schema went with the database: queues are created again on first use
		useJobs(async () => (await import('../../../../jobs/registry')).jobs);
		const again = await playHistory({ days: DAYS, now });
		expect({ ...again, seconds: 0 }).toEqual({ ...summary, seconds: 0 });
		expect(await fingerprint()).toEqual(first);
	}, 180_000);
});
