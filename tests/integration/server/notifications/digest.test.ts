// The pharmacists' morning digest on a seeded day: its counts equal the triage board's for the same
// data (the board's own queries, and an independent SQL count), and each active pharmacist gets one
// digest per day through the queue and the fake SMTP server.
import { and, eq, sql } from 'drizzle-orm';
import { beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { outboundEmails, users } from '../../../../src/lib/server/db/schema';
import { digestEmail, hospitalDay, queueMorningDigest, snapshot } from '../../../../src/lib/server/notifications';
import { countOpenedAfter, listBoard, openCounts } from '../../../../src/lib/server/flags';
import { messageIdFor } from '../../../../src/lib/server/mail';
import { QUEUES } from '../../../../src/lib/server/queue';
import { boardQuerySchema } from '../../../../src/lib/validation/flags';
import { createFlag, createUser, type FlagFixture } from '../../../fixtures/recommendations';
import { mailWorkers, waitFor } from '../recommendations/smtp';

const HOUR_MS = 3_600_000;
const smtp = mailWorkers([QUEUES.mailSend], { schedules: false });
let pharmacists: Awaited<ReturnType<typeof createUser>>[];
const seeded: Record<string, FlagFixture> = {};

// The seeded day. Expected counts are worked out by hand from this table:
// on the board = not closed and not asleep (snoozed until a time still ahead, or until the next result).
//                                     severity    state          opened h ago  on board?  new (<24 h)?
const DAY = [
	{ key: 'h1', severity: 'high', state: 'new', openedHoursAgo: 2 }, //          yes        yes
	{ key: 'h2', severity: 'high', state: 'in_review', openedHoursAgo: 30 }, //   yes        no
	{ key: 'h3', severity: 'high', state: 'recommended', openedHoursAgo: 50 }, // yes        no
	{ key: 'h4', severity: 'high', state: 'closed', openedHoursAgo: 5 }, //       no         —
	{ key: 'm1', severity: 'moderate', state: 'new', openedHoursAgo: 80 }, //     yes        no   (oldest waiting)
	{ key: 'm2', severity: 'moderate', state: 'snoozed', openedHoursAgo: 10, snoozedUntil: +6 }, // asleep: no
	{ key: 'm3', severity: 'moderate', state: 'snoozed', openedHoursAgo: 12, snoozedUntil: -1 }, // snooze over: yes, yes
	{ key: 'l1', severity: 'low', state: 'new', openedHoursAgo: 23 }, //          yes        yes
	{ key: 'l2', severity: 'low', state: 'snoozed', openedHoursAgo: 3, untilNextResult: true }, // asleep: no
	{ key: 'l3', severity: 'low', state: 'in_review', openedHoursAgo: 26 } //    yes        no
] as const;
const EXPECTED = { high: 3, moderate: 2, low: 2, newSinceYesterday: 3, awaitingPhysician: 1 };

beforeAll(async () => {
	const db = getDb();
	pharmacists = [await createUser(db, 'pharmacist', 'Ada Lintern'), await createUser(db, 'pharmacist', 'Bram Custance')];
	const retired = await createUser(db, 'pharmacist', 'Retired Pharmacist');
	await db.update(users).set({ active: false }).where(eq(users.id, retired.id));
	const now = new Date();
	for (const spec of DAY) {
		const s = spec as (typeof DAY)[number] & { snoozedUntil?: number; untilNextResult?: boolean };
		seeded[spec.key] = await createFlag(
			db,
			{
				severity: spec.severity,
				state: spec.state,
				openedHoursAgo: spec.openedHoursAgo,
				snoozedUntil: s.snoozedUntil !== undefined ? new Date(now.getTime() + s.snoozedUntil * HOUR_MS) : null,
				snoozeUntilNextResult: s.untilNextResult ?? false
			},
			now
		);
	}
});

describe('morning digest counts', () => {
	it('match the hand count of the seeded day', async () => {
		const snap = await snapshot(getDb(), new Date());
		expect(snap.bySeverity).toEqual({ high: EXPECTED.high, moderate: EXPECTED.moderate, low: EXPECTED.low });
		expect(snap.openTotal).toBe(EXPECTED.high + EXPECTED.moderate + EXPECTED.low);
		expect(snap.newSinceYesterday).toBe(EXPECTED.newSinceYesterday);
		expect(snap.awaitingPhysician).toBe(EXPECTED.awaitingPhysician);
	});

	it('equal the triage board’s own queries for the same data', async () => {
		const now = new Date();
		const snap = await snapshot(getDb(), now);
		const board = await openCounts();
		expect({ high: board.high, moderate: board.moderate, low: board.low }).toEqual(snap.bySeverity);
		const userId = pharmacists[0].id;
		for (const severity of ['high', 'moderate', 'low'] as const) {
			const page = await listBoard(boardQuerySchema.parse({ severity }), userId);
			expect(page.total).toBe(snap.bySeverity[severity]);
		}
		const since = new Date(now.getTime() - 24 * HOUR_MS);
		expect(await countOpenedAfter(boardQuerySchema.parse({}), userId, since)).toBe(snap.newSinceYesterday);
	});

	it('equal an independent SQL count', async () => {
		const [row] = await getDb().execute<{ high: number; moderate: number; low: number; fresh: number }>(sql`
			select
				count(*) filter (where severity = 'high')::int as high,
				count(*) filter (where severity = 'moderate')::int as moderate,
				count(*) filter (where severity = 'low')::int as low,
				count(*) filter (where opened_at > now() - interval '24 hours')::int as fresh
			from flags
			where state <> 'closed'
			  and not (state = 'snoozed' and (snooze_until_next_result or snoozed_until > now()))`);
		const snap = await snapshot(getDb(), new Date());
		expect(snap.bySeverity).toEqual({ high: row.high, moderate: row.moderate, low: row.low });
		expect(snap.newSinceYesterday).toBe(row.fresh);
	});

	it('lists the flags waiting longest for a pharmacist, oldest first, leaving out those already sent to a physician', async () => {
		const snap = await snapshot(getDb(), new Date());
		expect(snap.oldest.map((f) => f.flagId)).toEqual([seeded.m1, seeded.h2, seeded.l3, seeded.l1, seeded.m3].map((f) => f.flagId));
	});
});

describe('morning digest e-mail', () => {
	it('goes once a day to each active pharmacist, with the counts, the oldest flags and a link to the board', async () => {
		const now = new Date();
		const first = await queueMorningDigest(now);
		expect(first).toEqual({ queued: 2, day: hospitalDay(now) });
		expect(await queueMorningDigest(now)).toEqual({ queued: 0, day: hospitalDay(now) });
		const rows = await getDb()
			.select()
			.from(outboundEmails)
			.where(and(eq(outboundEmails.relatedType, 'digest'), sql`${outboundEmails.relatedId} like ${hospitalDay(now) + ':%'}`));
		expect(rows.map((r) => r.toAddress).sort()).toEqual(pharmacists.map((p) => p.email).sort());
		for (const row of rows) {
			const [mail] = await waitFor(async () => {
				const got = smtp.byMessageId(messageIdFor(row.id));
				return got.length ? got : null;
			}, `the digest to ${row.toAddress}`);
			expect(mail.subject).toBe('Ebbline morning digest: 7 open (3 high), 3 new');
			expect(mail.text).toContain('◆ High: 3');
			expect(mail.text).toContain('◈ Moderate: 2');
			expect(mail.text).toContain('◇ Low: 2');
			expect(mail.text).toContain('New since yesterday (opened in the last 24 h, still open): 3');
			expect(mail.text).toContain(`MRN ${seeded.m1.mrn}`);
			expect(mail.text).not.toContain(seeded.m1.familyName);
			expect(mail.text).toContain('http://ebbline.larkspur.test/board');
		}
	});

	it('says so plainly when nothing waits', () => {
		const { text } = digestEmail(
			{ at: new Date(), bySeverity: { high: 0, moderate: 0, low: 0 }, openTotal: 0, awaitingPhysician: 0, newSinceYesterday: 0, oldest: [] },
			'Ada Lintern',
			'initials_mrn_ward'
		);
		expect(text).toContain('No flag is waiting for a pharmacist.');
		expect(text).toContain('On the board: 0 open flags');
	});
});
