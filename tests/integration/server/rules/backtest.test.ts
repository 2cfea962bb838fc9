// Back-test against the real PostgreSQL, in a database of its own: a draft replayed over five days of
// stored assessments counts what it would add and remove, writes nothing, and its "if published now"
// counts equal what publishing and the replay then do.
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import type { RuleDefinition } from '../../../../src/lib/rules';
import { getDb } from '../../../../src/lib/server/db';
import { stopBoss } from '../../../../src/lib/server/queue';
import { ruleSets as rules, backTest, replayActiveOrders } from '../../../../src/lib/server/rules';
import { ceftriaxoneHistory, ensureAgent, makeUser, meropenemHistory, openFlags, type AgentRow } from './fixture';

const now = new Date();
let admin: Awaited<ReturnType<typeof makeUser>>;
let meropenem: AgentRow;
let ceftriaxone: AgentRow;
const rowsOf = async <T>(query: ReturnType<typeof sql>) => Array.from((await getDb().execute(query)) as Iterable<T>);

function withParam(base: RuleDefinition[], key: string, name: string, value: number) {
	const copy = structuredClone(base);
	const rule = copy.find((r) => r.key === key);
	if (!rule) throw new Error(key);
	rule.params[name] = value;
	return copy;
}

beforeAll(async () => {
	admin = await makeUser('admin', 'lead');
	meropenem = await ensureAgent('Meropenem');
	ceftriaxone = await ensureAgent('Ceftriaxone');
	await rules.seedDefaultVersion();
});

afterAll(async () => {
	await stopBoss();
});

describe('back-test', () => {
	it('counts on a seeded history what the draft adds and removes, writes nothing, and equals what publishing then does', async () => {
		// Five days of history. ARC threshold 130 → 120 (stricter); low albumin 30 → 26 g/L (looser).
		const arc = [
			await meropenemHistory(meropenem, now, [110, 118, 124, 126, 122]), // in [120, 130) on days 3–5, today 122: added, opens now
			await meropenemHistory(meropenem, now, [125, 123, 115, 110, 112]), // in [120, 130) on days 1–2 only: added in history, not now
			await meropenemHistory(meropenem, now, [140, 138, 136, 134, 132]), // ≥ 130 throughout: flagged by both
			await meropenemHistory(meropenem, now, [100, 100, 100, 105, 110]) // never
		];
		const albumin = [
			await ceftriaxoneHistory(ceftriaxone, now, [34, 31, 29, 28, 27]), // below 30 from day 3, never below 26: removed; open flag superseded now
			await ceftriaxoneHistory(ceftriaxone, now, [29, 28, 27, 26, 25]), // below 26 today: flagged by both, stays open
			await ceftriaxoneHistory(ceftriaxone, now, [35, 34, 33, 32, 31]) // never
		];
		const active = await rules.getActiveRuleSet();
		let draftRules = withParam(active.rules, 'possible-arc', 'arcCrclMlMin', 120);
		draftRules = withParam(draftRules, 'low-albumin-highly-bound', 'albuminModerateGL', 26);
		const draft = await rules.saveDraft(draftRules, { basedOn: active.id }, admin);
		const stored = (await rules.getVersion(draft.id))!;

		const counts = async () =>
			(await rowsOf<{ f: number; e: number }>(sql`select (select count(*) from flags)::int as f, (select count(*) from flag_events)::int as e`))[0];
		const before = await counts();
		const progress: string[] = [];
		const result = await backTest({ id: stored.id, version: stored.version, rules: stored.rules }, { days: 7, onProgress: (p) => progress.push(p.phase) });
		expect(await counts()).toEqual(before);
		expect(progress).toContain('history');
		expect(progress).toContain('now');

		// history, worked out by hand from the days above
		expect(result.orders).toBe(7);
		expect(result.orderDays).toBe(35);
		expect(result.byRule['possible-arc'].history).toEqual({
			draftOrders: 3,
			publishedOrders: 1,
			addedOrders: 2,
			removedOrders: 0,
			addedOrderDays: 5,
			removedOrderDays: 0
		});
		expect(result.byRule['low-albumin-highly-bound'].history).toEqual({
			draftOrders: 1,
			publishedOrders: 2,
			addedOrders: 0,
			removedOrders: 2,
			addedOrderDays: 0,
			removedOrderDays: 7
		});
		expect(result.byRule['possible-arc'].now).toEqual({ open: 1, supersede: 0 });
		expect(result.byRule['low-albumin-highly-bound'].now).toEqual({ open: 0, supersede: 1 });
		for (const [key, value] of Object.entries(result.byRule)) {
			if (key === 'possible-arc' || key === 'low-albumin-highly-bound') continue;
			expect(value.now, key).toEqual({ open: 0, supersede: 0 });
			expect(value.history.addedOrders + value.history.removedOrders, key).toBe(0);
		}

		await rules.publish(draft.id, admin, { expectedActiveId: active.id });
		const replay = await replayActiveOrders();
		for (const [key, value] of Object.entries(result.byRule)) {
			expect({ open: replay.byRule[key]?.opened ?? 0, supersede: replay.byRule[key]?.superseded ?? 0 }, key).toEqual(value.now);
		}
		expect((await openFlags(arc[0].id)).map((f) => f.rule_key)).toContain('possible-arc');
		expect((await openFlags(arc[1].id)).map((f) => f.rule_key)).not.toContain('possible-arc');
		expect((await openFlags(albumin[0].id)).map((f) => f.rule_key)).not.toContain('low-albumin-highly-bound');
		expect((await openFlags(albumin[1].id)).map((f) => f.rule_key)).toContain('low-albumin-highly-bound');
	});
});
