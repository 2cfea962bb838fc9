// The board cache (src/lib/server/flags/board-cache.ts): a page is read once and served from memory
// until a change is notified; a user's own write reads past it; without a listening connection the
// board is read uncached. (Cache invalidation by NOTIFY after commit: PostgreSQL documentation, NOTIFY.)
import { eq, sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { createDatabase, getDb, type Database } from '../../../../src/lib/server/db';
import { assessments, flags, users } from '../../../../src/lib/server/db/schema';
import { boardPageJson, noteWrite, stopBoardCache } from '../../../../src/lib/server/flags';
import { boardQuerySchema } from '../../../../src/lib/validation/flags';
import { createWardRound } from '../../../fixtures/board';
import type { BoardPage } from '../../../../src/lib/flags/board';

const TAG = 'BC';
let round: Awaited<ReturnType<typeof createWardRound>>;
let farrow: string;
let wren: string;
const query = boardQuerySchema.parse({});
const page = async (userId: string) => JSON.parse(new TextDecoder().decode(await boardPageJson(query, userId))) as BoardPage;
const findingOf = async (userId: string, flagId: string) => (await page(userId)).rows.find((r) => r.id === flagId)?.finding;
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

/**
 * The superuser's login to this file's database: only it may set session_replication_role (the app
 * role, which the rest of this file uses, may not).
 */
function asSuperuser<T>(fn: (db: Database) => Promise<T>): Promise<T> {
	const url = new URL(process.env.EBBLINE_TEST_ADMIN_URL!);
	url.pathname = new URL(process.env.DATABASE_URL!).pathname;
	const db = createDatabase(url.toString(), { max: 1 });
	return fn(db).finally(() => db.$client.end({ timeout: 5 }));
}

/** Changes a flag without firing the triggers, as if its notification were lost. */
async function silentUpdate(flagId: string, finding: string) {
	await asSuperuser((db) =>
		db.transaction(async (tx) => {
			await tx.execute(sql`set local session_replication_role = replica`);
			await tx.update(flags).set({ finding }).where(eq(flags.id, flagId));
		})
	);
}

async function eventually(check: () => Promise<boolean>, ms = 3000) {
	const until = Date.now() + ms;
	while (!(await check())) {
		if (Date.now() > until) throw new Error('condition not met in time');
		await sleep(25);
	}
}

beforeAll(async () => {
	const made = await getDb()
		.insert(users)
		.values([
			{ email: 'farrow@larkspur.test', displayName: 'Imogen Farrow', role: 'pharmacist', passwordHash: 'not-used' },
			{ email: 'wren@larkspur.test', displayName: 'Tobias Wren', role: 'pharmacist', passwordHash: 'not-used' }
		])
		.returning();
	[farrow, wren] = made.map((u) => u.id);
	round = await createWardRound(getDb(), TAG);
	// the first read starts the listener; wait until pages are being cached
	const top = round.vanc.flagIds[0];
	await eventually(async () => {
		await page(farrow);
		await silentUpdate(top, 'probe');
		const cached = (await findingOf(farrow, top)) !== 'probe';
		await getDb().update(flags).set({ finding: 'restored' }).where(eq(flags.id, top));
		return cached;
	});
});
afterAll(stopBoardCache);

describe('board cache', () => {
	it('serves a page from memory: a change whose notification never came is not seen', async () => {
		const id = round.vanc.flagIds[0];
		await getDb().update(flags).set({ finding: 'settled' }).where(eq(flags.id, id));
		// the value can be read before its notification lands; let the notifications in flight arrive
		await sleep(300);
		expect(await findingOf(wren, id)).toBe('settled');
		await silentUpdate(id, 'changed behind the cache');
		expect(await findingOf(wren, id)).toBe('settled');
		expect(await findingOf(farrow, id)).toBe('settled');
	});

	it('drops every page when a change is committed (NOTIFY from the trigger)', async () => {
		const id = round.vanc.flagIds[0];
		await getDb().update(flags).set({ finding: 'committed change' }).where(eq(flags.id, id));
		await eventually(async () => (await findingOf(wren, id)) === 'committed change');
		expect(await findingOf(farrow, id)).toBe('committed change');
	});

	it('lets a user who just wrote read past the cache; others see it when notified', async () => {
		const id = round.vanc.flagIds[0];
		await eventually(async () => (await findingOf(wren, id)) === 'committed change');
		await sleep(300);
		await findingOf(wren, id);
		await silentUpdate(id, 'my own change');
		noteWrite(farrow);
		expect(await findingOf(farrow, id)).toBe('my own change');
		expect(await findingOf(wren, id)).toBe('committed change');
	});

	it("drops the pages when an order is re-assessed, also an order without a flag (the answer names each order's newest assessment)", async () => {
		const orderId = round.closed.orderId;
		const named = boardQuerySchema.parse({ order: orderId });
		const assessedAt = async () => {
			const body = JSON.parse(new TextDecoder().decode(await boardPageJson(named, wren))) as BoardPage;
			expect(body.rows).toEqual([]);
			return body.orders?.[0]?.assessedAt;
		};
		const [latest] = await getDb()
			.select()
			.from(assessments)
			.where(eq(assessments.id, round.closed.assessmentIds.at(-1)!));
		const { id: _id, createdAt: _createdAt, ...copy } = latest;
		await sleep(300);
		expect(await assessedAt()).toBe(latest.at.toISOString());
		const silently = new Date(Date.now() - 60_000);
		await asSuperuser((db) =>
			db.transaction(async (tx) => {
				await tx.execute(sql`set local session_replication_role = replica`);
				await tx.insert(assessments).values({ ...copy, at: silently });
			})
		);
		expect(await assessedAt()).toBe(latest.at.toISOString());
		const now = new Date();
		await getDb()
			.insert(assessments)
			.values({ ...copy, at: now });
		await eventually(async () => (await assessedAt()) === now.toISOString());
	});

	it('expires a page after a few seconds (time alone changes a snooze)', async () => {
		const id = round.vanc.flagIds[0];
		await sleep(300);
		await findingOf(wren, id);
		await silentUpdate(id, 'seen after expiry');
		expect(await findingOf(wren, id)).not.toBe('seen after expiry');
		await eventually(async () => (await findingOf(wren, id)) === 'seen after expiry', 8000);
	}, 15_000);
});
