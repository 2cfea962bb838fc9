// Rule versions against the real PostgreSQL: drafts, validation, publish and replay (stricter threshold
// opens, looser supersedes), two administrators publishing at once, roll back, hit counts.
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { defaultRules, type RuleDefinition } from '../../../../src/lib/rules';
import { getDb } from '../../../../src/lib/server/db';
import { stopBoss } from '../../../../src/lib/server/queue';
import { ruleSets as rules, replayActiveOrders } from '../../../../src/lib/server/rules';
import { DAY_MS, ensureAgent, makeUser, meropenemHistory, openFlags, type AgentRow } from './fixture';

const now = new Date();
type Actor = Awaited<ReturnType<typeof makeUser>>;
let admin: Actor;
let admin2: Actor;
let meropenem: AgentRow;

const rowsOf = async <T>(query: ReturnType<typeof sql>) => Array.from((await getDb().execute(query)) as Iterable<T>);

function withParam(base: RuleDefinition[], key: string, name: string, value: number) {
	const copy = structuredClone(base);
	const rule = copy.find((r) => r.key === key);
	if (!rule) throw new Error(key);
	rule.params[name] = value;
	return copy;
}

/** Saves a draft from the active set with one threshold changed, publishes it and runs the replay. */
async function publishWith(key: string, name: string, value: number) {
	const active = await rules.getActiveRuleSet();
	const draft = await rules.saveDraft(withParam(active.rules, key, name, value), { basedOn: active.id }, admin);
	await rules.publish(draft.id, admin, { expectedActiveId: active.id });
	return replayActiveOrders();
}

beforeAll(async () => {
	admin = await makeUser('admin', 'lead');
	admin2 = await makeUser('admin', 'second-lead');
	meropenem = await ensureAgent('Meropenem');
	await rules.seedDefaultVersion();
});

afterAll(async () => {
	await stopBoss();
});

describe('drafts and validation', () => {
	it('saves every edit as a new draft version with its author, and audits it with a readable diff', async () => {
		const active = await rules.getActiveRuleSet();
		const draft = await rules.saveDraft(withParam(active.rules, 'possible-arc', 'arcCrclMlMin', 125), { basedOn: active.id, note: 'stricter ARC' }, admin);
		const again = await rules.saveDraft(withParam(active.rules, 'possible-arc', 'arcCrclMlMin', 124), { basedOn: active.id }, admin);
		expect(again.version).toBe(draft.version + 1);
		const listed = (await rules.listVersions()).find((v) => v.id === draft.id);
		expect(listed).toMatchObject({ status: 'draft', author: 'lead', note: 'stricter ARC' });
		const [auditRow] = await rowsOf<{ after: { changes: { changes: string[] }[] } }>(
			sql`select after from audit_log where action = 'rules.draft_saved' and object_id = ${draft.id}`
		);
		expect(auditRow.after.changes[0].changes[0]).toMatch(/Possible augmented renal clearance from CrCl: 130\s?mL\/min → 125\s?mL\/min/u);
		// the working version is the newest draft after the active one
		expect((await rules.workingVersion()).draft?.id).toBe(again.id);
	});

	it('rejects invalid JSON Logic and out-of-range thresholds with messages naming them, and stores nothing', async () => {
		const count = async () => (await rowsOf<{ n: number }>(sql`select count(*)::int as n from rule_versions`))[0].n;
		const before = await count();
		const broken = defaultRules();
		broken.find((r) => r.key === 'half-life-prolonged')!.when = { '>=': [{ var: 'halfLifeRatioo' }, { var: 'params.halfLifeRatioMin' }] };
		broken.find((r) => r.key === 'low-albumin-highly-bound')!.params.albuminModerateGL = 55;
		const error = await rules.saveDraft(broken, { basedOn: null }, admin).catch((e) => e);
		expect(error).toBeInstanceOf(rules.RuleValidationError);
		const messages = (error as rules.RuleValidationError).issues.map((i) => i.message).join('\n');
		expect(messages).toContain('unknown variable "halfLifeRatioo" (did you mean "halfLifeRatio"?)');
		expect(messages).toMatch(/\(albuminModerateGL\) must be between 15\s?g\/L and 40\s?g\/L; got 55\s?g\/L/u);
		expect(await count()).toBe(before);
	});
});

describe('publish and replay', () => {
	it('opens the expected flags after a stricter threshold and supersedes them after a looser one', async () => {
		// CrCl today: 124, 128 (between the new 120 and the default 130), 112 (below both), 135 (above both)
		const orders = [
			await meropenemHistory(meropenem, now, [124]),
			await meropenemHistory(meropenem, now, [128]),
			await meropenemHistory(meropenem, now, [112]),
			await meropenemHistory(meropenem, now, [135])
		];
		const arcOpen = async () => Promise.all(orders.map(async (o) => (await openFlags(o.id)).some((f) => f.rule_key === 'possible-arc')));
		expect(await arcOpen()).toEqual([false, false, false, true]);

		const stricter = await publishWith('possible-arc', 'arcCrclMlMin', 120);
		expect(await arcOpen()).toEqual([true, true, false, true]);
		expect(stricter.byRule['possible-arc']).toMatchObject({ opened: 2, superseded: 0 });
		const [flag] = await openFlags(orders[0].id);
		const active = await rules.getActiveRuleSet();
		expect(flag.rule_version_id).toBe(active.id);
		expect(flag.finding).toMatch(/threshold 120\s?mL\/min/u);

		const looser = await publishWith('possible-arc', 'arcCrclMlMin', 130);
		expect(await arcOpen()).toEqual([false, false, false, true]);
		expect(looser.byRule['possible-arc']).toMatchObject({ opened: 0, superseded: 2 });
		const closed = await rowsOf<{ outcome: string; n: number }>(
			sql`select outcome, count(*)::int as n from flags where order_id = ${orders[1].id}::uuid and state = 'closed' group by outcome`
		);
		expect(closed).toEqual([{ outcome: 'superseded', n: 1 }]);
	});

	it('queues rules.replay in the publish transaction and audits the publication', async () => {
		const active = await rules.getActiveRuleSet();
		const draft = await rules.saveDraft(
			active.rules.map((r) => (r.key === 'creatinine-missing' ? { ...r, enabled: false } : r)),
			{ basedOn: active.id },
			admin
		);
		const jobsBefore = (await rowsOf<{ n: number }>(sql`select count(*)::int as n from pgboss.job where name = 'rules.replay'`))[0].n;
		await rules.publish(draft.id, admin);
		const jobs = await rowsOf<{ data: { reason: string; ruleVersionId: string } }>(
			sql`select data from pgboss.job where name = 'rules.replay' order by created_on`
		);
		expect(jobs.length).toBe(jobsBefore + 1);
		expect(jobs.at(-1)?.data).toEqual({ reason: 'publish', ruleVersionId: draft.id });
		const [auditRow] = await rowsOf<{ actor_id: string; before: { version: number }; after: { changes: { changes: string[] }[] } }>(
			sql`select actor_id, before, after from audit_log where action = 'rules.published' and object_id = ${draft.id}`
		);
		expect(auditRow.actor_id).toBe(admin.actorId);
		expect(auditRow.before.version).toBe(active.version);
		expect(auditRow.after.changes[0].changes).toEqual(['switched off']);
		// switch it back on for the tests that follow
		await rules.rollBack(active.id, admin);
	});

	it('never leaves two active versions when two administrators publish at once; the loser gets a clear error', async () => {
		const active = await rules.getActiveRuleSet();
		const a = await rules.saveDraft(withParam(active.rules, 'half-life-prolonged', 'halfLifeRatioMin', 1.6), { basedOn: active.id }, admin);
		const b = await rules.saveDraft(withParam(active.rules, 'half-life-prolonged', 'halfLifeRatioMin', 1.7), { basedOn: active.id }, admin2);
		const results = await Promise.allSettled([
			rules.publish(a.id, admin, { expectedActiveId: active.id }),
			rules.publish(b.id, admin2, { expectedActiveId: active.id })
		]);
		const won = results.filter((r) => r.status === 'fulfilled');
		const lost = results.filter((r): r is PromiseRejectedResult => r.status === 'rejected');
		expect(won).toHaveLength(1);
		expect(lost).toHaveLength(1);
		expect(lost[0].reason).toBeInstanceOf(rules.PublishConflictError);
		expect(String(lost[0].reason.message)).toMatch(/published|same moment/);
		const activeRows = await rowsOf<{ id: string }>(sql`select id from rule_versions where status = 'active'`);
		expect(activeRows).toHaveLength(1);
		// the loser's draft is kept as a draft
		const statuses = await rowsOf<{ id: string; status: string }>(sql`select id, status from rule_versions where id in (${a.id}::uuid, ${b.id}::uuid)`);
		expect(statuses.map((s) => s.status).sort()).toEqual(['active', 'draft']);
	});

	it('refuses to publish over a version published since the page was loaded', async () => {
		const stale = (await rules.listVersions()).find((v) => v.status === 'retired');
		const active = await rules.getActiveRuleSet();
		const draft = await rules.saveDraft(active.rules, { basedOn: active.id }, admin);
		await expect(rules.publish(draft.id, admin, { expectedActiveId: stale!.id })).rejects.toThrow(/was published after you loaded this page/);
	});

	it('rolls back to any version by publishing a copy of it, with a readable diff', async () => {
		const versions = await rules.listVersions();
		const first = versions.find((v) => v.version === 1)!;
		const before = await rules.getActiveRuleSet();
		const result = await rules.rollBack(first.id, admin);
		const after = await rules.getActiveRuleSet();
		expect(after.id).not.toBe(first.id);
		expect(after.version).toBe(result.version);
		expect(after.rules).toEqual((await rules.getVersion(first.id))!.rules);
		const diff = await rules.diffVersions(before.id, after.id);
		expect(diff.find((d) => d.ruleKey === 'half-life-prolonged')?.changes[0]).toMatch(/1\.[67]× → 1\.5×/);
		const [row] = await rowsOf<{ note: string; status: string }>(sql`select note, status from rule_versions where id = ${after.id}::uuid`);
		expect(row).toEqual({ note: `Roll back to version 1`, status: 'active' });
		expect((await rowsOf(sql`select 1 from audit_log where action = 'rules.rolled_back' and object_id = ${after.id}`)).length).toBe(1);
	});
});

describe('hit counts', () => {
	it('counts findings raised per rule over 7 and 30 days', async () => {
		const aged = await rowsOf<{ id: string }>(sql`select id from flag_findings where rule_key = 'possible-arc' order by raised_at limit 1`);
		await getDb().execute(
			sql`update flag_findings set raised_at = ${new Date(now.getTime() - 10 * DAY_MS).toISOString()}::timestamptz where id = ${aged[0].id}::uuid`
		);
		const [expected] = await rowsOf<{ d7: number; d30: number }>(
			sql`select count(*) filter (where raised_at >= now() - interval '7 days')::int as d7, count(*)::int as d30 from flag_findings where rule_key = 'possible-arc'`
		);
		const hits = await rules.hitCounts();
		expect(hits['possible-arc']).toEqual({ days7: expected.d7, days30: expected.d30 });
		expect(hits['possible-arc'].days30 - hits['possible-arc'].days7).toBe(1);
	});
});
