// The rules and agent-library form actions go through parseForm's input guard: a NUL in any field is
// refused with a 400 naming the field, before the text can reach PostgreSQL (which cannot store it).
import { sql } from 'drizzle-orm';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import { getDb } from '../../../../src/lib/server/db';
import { stopBoss } from '../../../../src/lib/server/queue';
import { ruleSets as rules } from '../../../../src/lib/server/rules';
import { ruleField } from '../../../../src/lib/validation/rules';
import { actions as agentActions } from '../../../../src/routes/admin/agents/+page.server';
import { actions as ruleActions } from '../../../../src/routes/admin/rules/+page.server';
import { ensureAgent, makeUser, type AgentRow } from './fixture';

type Failure = { status: number; data: { errors: Record<string, string> } };
let admin: Awaited<ReturnType<typeof makeUser>>;
let meropenem: AgentRow;

const rowsOf = async <T>(query: ReturnType<typeof sql>) => Array.from((await getDb().execute(query)) as Iterable<T>);

/** A form post from a signed-in administrator, as SvelteKit hands it to the action. */
function post(fields: Record<string, string>) {
	const request = new Request('http://localhost/admin/rules', {
		method: 'POST',
		body: new URLSearchParams(fields).toString(),
		headers: { 'content-type': 'application/x-www-form-urlencoded', origin: 'http://localhost' }
	});
	const locals = {
		requestId: 'test',
		sessionId: 's',
		user: { id: admin.actorId, email: admin.actorLabel, displayName: 'lead', role: 'admin' },
		feedToken: null
	};
	return { request, locals, url: new URL(request.url), params: {} } as never;
}

beforeAll(async () => {
	admin = await makeUser('admin', 'guard-lead');
	meropenem = await ensureAgent('Meropenem');
	await rules.seedDefaultVersion();
});

afterAll(async () => {
	await stopBoss();
});

describe('a NUL character in a rules or agents form', () => {
	it('save (rules): 400 naming the rule text field, and no draft is stored', async () => {
		const active = await rules.getActiveRuleSet();
		const rule = active.rules[0];
		const field = ruleField.finding(rule.key);
		const drafts = async () => (await rowsOf<{ n: number }>(sql`select count(*)::int as n from rule_versions`))[0].n;
		const before = await drafts();
		const result = (await ruleActions.save(
			post({ basedOn: active.id, [ruleField.present(rule.key)]: '1', [ruleField.enabled(rule.key)]: 'on', [field]: `Check the dose\u0000 today` })
		)) as Failure;
		expect(result.status).toBe(400);
		expect(result.data.errors[field]).toMatch(/NUL character/);
		expect(await drafts()).toBe(before);
	});

	it('publish: 400 naming the version field', async () => {
		const active = await rules.getActiveRuleSet();
		const result = (await ruleActions.publish(post({ versionId: `${active.id}\u0000`, expectedActiveId: active.id }))) as Failure;
		expect(result.status).toBe(400);
		expect(result.data.errors.versionId).toMatch(/NUL character/);
	});

	it('rollBack: 400 naming the expected-active field', async () => {
		const active = await rules.getActiveRuleSet();
		const result = (await ruleActions.rollBack(post({ versionId: active.id, expectedActiveId: `\u0000${active.id}` }))) as Failure;
		expect(result.status).toBe(400);
		expect(result.data.errors.expectedActiveId).toMatch(/NUL character/);
	});

	it('save (agents): 400 naming the band note, and the agent is unchanged', async () => {
		const result = (await agentActions.save(post({ id: meropenem.id, 'bands.0.note': 'after\u0000dialysis' }))) as Failure;
		expect(result.status).toBe(400);
		expect(result.data.errors['bands.0.note']).toMatch(/NUL character/);
		const [row] = await rowsOf<{ params: AgentRow['params'] }>(sql`select params from agents where id = ${meropenem.id}::uuid`);
		expect(row.params).toEqual(meropenem.params);
	});
});
