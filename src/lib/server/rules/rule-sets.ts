// Rule set versions: the active version (seeded with the defaults when there is none), drafts, publish
// and roll back, readable diffs and hit counts. Publishing starts `rules.replay` in the same transaction.
import { and, desc, eq, sql } from 'drizzle-orm';
import { alias } from 'drizzle-orm/pg-core';
import { defaultRules, withOneBandTolerance } from '../../rules/default-rules';
import { diffRuleSets, type RuleChange } from '../../rules/diff';
import type { RuleDefinition } from '../../rules/types';
import { validateRuleSet, type RuleIssue } from '../../rules/validate';
import * as audit from '../audit';
import { getDb, type DbOrTx } from '../db';
import { ruleVersions, users } from '../db/schema';
import { getBoss, QUEUES, send } from '../queue';
import { SYSTEM_ACTOR as SYSTEM, type Actor } from '../../domain/actor';

export type RuleSetRef = { id: string; version: number; rules: RuleDefinition[] };
export type ReplayJob = { reason: 'publish' | 'agent' | 'manual'; ruleVersionId?: string; agentId?: string };

/** Rule set contents never change once stored, so each version is parsed once per process. */
const cache = new Map<string, RuleDefinition[]>();

export class RuleValidationError extends Error {
	constructor(readonly issues: RuleIssue[]) {
		super(issues.map((i) => i.message).join(' '));
	}
}

/** Raised to the administrator who loses a publish race, or publishes over a version they have not seen. */
export class PublishConflictError extends Error {}
export class RuleVersionNotFoundError extends Error {}

function pgError(error: unknown): { code?: string; constraint?: string } {
	let e = error as { code?: string; constraint_name?: string; cause?: unknown } | undefined;
	for (let i = 0; e && i < 5; i++) {
		if (e.code) return { code: e.code, constraint: e.constraint_name };
		e = e.cause as typeof e;
	}
	return {};
}

const rows = <T>(result: unknown) => Array.from(result as Iterable<T>);

/**
 * The active rule set. When there is none (a fresh database), the default rule set is stored as the
 * active version first — safe when several workers get here at once: the partial unique index lets
 * one insert win and the others read it.
 */
export async function getActiveRuleSet(db: DbOrTx = getDb()): Promise<RuleSetRef> {
	for (let attempt = 0; attempt < 5; attempt++) {
		const [active] = rows<{ id: string; version: number }>(await db.execute(sql`select id, version from rule_versions where status = 'active'`));
		if (active) {
			let rules = cache.get(active.id);
			if (!rules) {
				const [row] = await db.select({ rules: ruleVersions.rules }).from(ruleVersions).where(eq(ruleVersions.id, active.id));
				rules = withOneBandTolerance(row.rules as RuleDefinition[]);
				cache.set(active.id, rules);
			}
			return { id: active.id, version: active.version, rules };
		}
		await seedDefaultVersion(db);
	}
	throw new Error('No active rule version could be read or created.');
}

/** Rule titles of the active rule set by key; a rule no longer in it is shown by its key. */
export async function ruleTitles(db: DbOrTx = getDb()): Promise<(key: string) => string> {
	const { rules } = await getActiveRuleSet(db);
	const titles = new Map(rules.map((r) => [r.key, r.title]));
	return (key) => titles.get(key) ?? key;
}

export const DEFAULT_VERSION_NOTE = 'Default rule set';

/**
 * Stores the default rule set as the active version if there is none; returns true when this call did.
 * An install whose active version is still a default set nobody has published by hand (seeded by the
 * system, author and publisher empty) moves to the current defaults, so safety corrections to the
 * default rules reach it; the old version is retired, not changed. A set an administrator published is
 * never replaced.
 */
export async function seedDefaultVersion(db: DbOrTx = getDb()): Promise<boolean> {
	const rules = defaultRules();
	const upgraded = rows<{ id: string; version: number; previous: number }>(
		await db.execute(sql`
			with old as (
				update rule_versions set status = 'retired'
				where status = 'active' and note = ${DEFAULT_VERSION_NOTE} and author_id is null and published_by is null
					and rules <> ${JSON.stringify(rules)}::jsonb
				returning version
			)
			insert into rule_versions (version, status, rules, note, published_at)
			select (select max(version) from rule_versions) + 1, 'active', ${JSON.stringify(rules)}::jsonb, ${DEFAULT_VERSION_NOTE}, now()
			from old
			returning id, version, (select version from old) as previous`)
	);
	if (upgraded.length > 0) {
		await audit.record(
			{
				...SYSTEM,
				action: 'rules.default_upgraded',
				objectType: 'rule_version',
				objectId: upgraded[0].id,
				after: { version: upgraded[0].version, replaces: upgraded[0].previous, rules: rules.length }
			},
			db
		);
		return true;
	}
	const inserted = rows<{ id: string; version: number }>(
		await db.execute(sql`
			insert into rule_versions (version, status, rules, note, published_at)
			select coalesce(max(version), 0) + 1, 'active', ${JSON.stringify(rules)}::jsonb, ${DEFAULT_VERSION_NOTE}, now()
			from rule_versions
			having not exists (select 1 from rule_versions where status = 'active')
			on conflict do nothing
			returning id, version`)
	);
	if (inserted.length === 0) return false;
	await audit.record(
		{
			...SYSTEM,
			action: 'rules.default_seeded',
			objectType: 'rule_version',
			objectId: inserted[0].id,
			after: { version: inserted[0].version, rules: rules.length }
		},
		db
	);
	return true;
}

export type VersionSummary = {
	id: string;
	version: number;
	status: 'draft' | 'active' | 'retired';
	note: string | null;
	basedOn: string | null;
	author: string | null;
	createdAt: Date;
	publishedAt: Date | null;
	publishedBy: string | null;
};

/** Every version, newest first, with who wrote and who published it. */
export async function listVersions(db: DbOrTx = getDb()): Promise<VersionSummary[]> {
	const publisher = alias(users, 'publisher');
	return db
		.select({
			id: ruleVersions.id,
			version: ruleVersions.version,
			status: ruleVersions.status,
			note: ruleVersions.note,
			basedOn: ruleVersions.basedOn,
			author: users.displayName,
			createdAt: ruleVersions.createdAt,
			publishedAt: ruleVersions.publishedAt,
			publishedBy: publisher.displayName
		})
		.from(ruleVersions)
		.leftJoin(users, eq(users.id, ruleVersions.authorId))
		.leftJoin(publisher, eq(publisher.id, ruleVersions.publishedBy))
		.orderBy(desc(ruleVersions.version));
}

export async function getVersion(id: string, db: DbOrTx = getDb()) {
	const [row] = await db.select().from(ruleVersions).where(eq(ruleVersions.id, id));
	return row ? { ...row, rules: row.rules as RuleDefinition[] } : undefined;
}

/**
 * The version an administrator edits: the newest draft written after the active version was
 * published (and based on it), otherwise the active version itself.
 */
export async function workingVersion(db: DbOrTx = getDb()) {
	const active = await getActiveRuleSet(db);
	const [draft] = await db
		.select()
		.from(ruleVersions)
		.where(and(eq(ruleVersions.status, 'draft'), sql`${ruleVersions.version} > ${active.version}`))
		.orderBy(desc(ruleVersions.version))
		.limit(1);
	return { active, draft: draft ? { ...draft, rules: draft.rules as RuleDefinition[] } : null };
}

/** Saves a validated rule set as a new draft version (every save makes one). */
export async function saveDraft(input: unknown, options: { basedOn: string | null; note?: string | null }, who: Actor, db: DbOrTx = getDb()) {
	const valid = validateRuleSet(input);
	if (!valid.ok) throw new RuleValidationError(valid.issues);
	const base = options.basedOn ? await getVersion(options.basedOn, db) : undefined;
	for (let attempt = 0; attempt < 5; attempt++) {
		try {
			const [row] = await db
				.insert(ruleVersions)
				.values({
					version: sql`(select coalesce(max(version), 0) + 1 from rule_versions)`,
					status: 'draft',
					rules: valid.rules,
					note: options.note?.trim() || null,
					basedOn: options.basedOn,
					authorId: who.actorId
				})
				.returning({ id: ruleVersions.id, version: ruleVersions.version });
			await audit.record(
				{
					...who,
					action: 'rules.draft_saved',
					objectType: 'rule_version',
					objectId: row.id,
					after: { version: row.version, basedOn: base?.version ?? null, changes: base ? diffRuleSets(base.rules, valid.rules) : null }
				},
				db
			);
			return row;
		} catch (error) {
			// two saves at the same moment picked the same number: take the next one
			if (pgError(error).code === '23505' && attempt < 4) continue;
			throw error;
		}
	}
	throw new Error('Could not number the draft version.');
}

/** Queues rules.replay in the caller's transaction (policy in jobs/rules-replay.ts); returns the job id. */
async function enqueueReplay(tx: DbOrTx, job: ReplayJob) {
	return send(QUEUES.rulesReplay, job, { tx });
}

/**
 * Makes a draft the active version and starts `rules.replay`, in one transaction. The active row is
 * locked first; a second administrator publishing at the same moment waits, then fails on the
 * one-active index, and gets a PublishConflictError naming what happened. With `expectedActiveId`
 * (the active version the administrator's page showed) a version published meanwhile is refused too.
 */
export async function publish(versionId: string, who: Actor, options: { expectedActiveId?: string; note?: string } = {}) {
	try {
		return await getDb().transaction(async (tx) => publishIn(tx, versionId, who, options));
	} catch (error) {
		const { code, constraint } = pgError(error);
		if (code === '23505' && (constraint === undefined || constraint === 'rule_versions_one_active')) {
			throw new PublishConflictError(
				'Another administrator published a rule version at the same moment. Reload the page to see it, then publish again if you still want your draft.'
			);
		}
		throw error;
	}
}

async function publishIn(tx: DbOrTx, versionId: string, who: Actor, options: { expectedActiveId?: string; action?: string }) {
	const [current] = rows<{ id: string; version: number }>(await tx.execute(sql`select id, version from rule_versions where status = 'active' for update`));
	if (options.expectedActiveId && current && current.id !== options.expectedActiveId) {
		throw new PublishConflictError(
			`Version ${current.version} was published after you loaded this page, so your draft was not published. Reload to see it; your draft is kept.`
		);
	}
	const [target] = await tx.select().from(ruleVersions).where(eq(ruleVersions.id, versionId)).for('update');
	if (!target) throw new RuleVersionNotFoundError('That rule version does not exist.');
	if (target.status !== 'draft') {
		throw new PublishConflictError(
			`Version ${target.version} is ${target.status === 'active' ? 'already active' : 'retired'}; use "Roll back" to make an older version active again.`
		);
	}
	const valid = validateRuleSet(target.rules);
	if (!valid.ok) throw new RuleValidationError(valid.issues);
	const now = new Date();
	if (current) await tx.update(ruleVersions).set({ status: 'retired' }).where(eq(ruleVersions.id, current.id));
	await tx.update(ruleVersions).set({ status: 'active', publishedAt: now, publishedBy: who.actorId }).where(eq(ruleVersions.id, versionId));
	const previous = current ? await getVersion(current.id, tx) : undefined;
	await audit.record(
		{
			...who,
			action: options.action ?? 'rules.published',
			objectType: 'rule_version',
			objectId: versionId,
			before: current ? { version: current.version } : null,
			after: { version: target.version, changes: previous ? diffRuleSets(previous.rules, valid.rules) : null }
		},
		tx
	);
	const replayJobId = await enqueueReplay(tx, { reason: 'publish', ruleVersionId: versionId });
	return { id: versionId, version: target.version, previousVersion: current?.version ?? null, replayJobId };
}

/** Roll back = publish a copy of an older version as a new version (history is never rewritten). */
export async function rollBack(versionId: string, who: Actor, options: { expectedActiveId?: string } = {}) {
	try {
		return await getDb().transaction(async (tx) => {
			const source = await getVersion(versionId, tx);
			if (!source) throw new RuleVersionNotFoundError('That rule version does not exist.');
			const copy = await saveDraft(source.rules, { basedOn: source.id, note: `Roll back to version ${source.version}` }, who, tx);
			const published = await publishIn(tx, copy.id, who, { ...options, action: 'rules.rolled_back' });
			return { ...published, restoredVersion: source.version };
		});
	} catch (error) {
		const { code, constraint } = pgError(error);
		if (code === '23505' && (constraint === undefined || constraint === 'rule_versions_one_active')) {
			throw new PublishConflictError('Another administrator published a rule version at the same moment. Reload the page and try again.');
		}
		throw error;
	}
}

/** Readable changes from one version to another. */
export async function diffVersions(fromId: string, toId: string, db: DbOrTx = getDb()): Promise<RuleChange[]> {
	const [from, to] = await Promise.all([getVersion(fromId, db), getVersion(toId, db)]);
	if (!from || !to) throw new RuleVersionNotFoundError('That rule version does not exist.');
	return diffRuleSets(from.rules, to.rules);
}

/** Findings raised per rule over the last 7 and 30 days (one per order each time the rule starts to hold). */
export async function hitCounts(db: DbOrTx = getDb(), now = new Date()): Promise<Record<string, { days7: number; days30: number }>> {
	const result = rows<{ rule_key: string; days7: number; days30: number }>(
		await db.execute(sql`
			select rule_key,
				count(*) filter (where raised_at >= ${now.toISOString()}::timestamptz - interval '7 days')::int as days7,
				count(*)::int as days30
			from flag_findings
			where raised_at >= ${now.toISOString()}::timestamptz - interval '30 days'
			group by rule_key`)
	);
	return Object.fromEntries(result.map((r) => [r.rule_key, { days7: r.days7, days30: r.days30 }]));
}

/** Starts a replay outside a publish (e.g. after an agent edit), in the caller's transaction. */
export async function requestReplay(tx: DbOrTx, job: ReplayJob) {
	return enqueueReplay(tx, job);
}

/** State of a replay job (for the page that started it). */
export async function replayStatus(jobId: string) {
	const boss = await getBoss();
	const job = await boss.getJobById(QUEUES.rulesReplay, jobId);
	if (!job) return null;
	return { state: job.state, output: job.output ?? null, createdOn: job.createdOn, startedOn: job.startedOn ?? null, completedOn: job.completedOn ?? null };
}

export type VersionWithDiff = VersionSummary & { comparedWith: number | null; changes: RuleChange[] };

/**
 * The newest versions with what each changed against the version it was based on (or the one
 * before it), for the versions list.
 */
export async function versionsWithDiffs(limit = 30, db: DbOrTx = getDb()): Promise<VersionWithDiff[]> {
	const summaries = (await listVersions(db)).slice(0, limit);
	const full = await db.select({ id: ruleVersions.id, version: ruleVersions.version, rules: ruleVersions.rules }).from(ruleVersions);
	const byId = new Map(full.map((v) => [v.id, v]));
	const byNumber = new Map(full.map((v) => [v.version, v]));
	return summaries.map((v) => {
		const base = (v.basedOn ? byId.get(v.basedOn) : undefined) ?? byNumber.get(v.version - 1);
		const self = byId.get(v.id);
		return {
			...v,
			comparedWith: base?.version ?? null,
			changes: base && self ? diffRuleSets(base.rules as RuleDefinition[], self.rules as RuleDefinition[]) : []
		};
	});
}
