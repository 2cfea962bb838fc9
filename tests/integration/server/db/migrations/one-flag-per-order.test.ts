// Migration 0009 (one open flag per order, holding findings) against real data: the demo database as it
// stood at 0008 is restored into a scratch database, counted, then brought up to date with the committed
// migrations; nothing a person did (events, notes, recommendations, audit rows) may be lost or point
// nowhere. A second, hand-built order checks which flag survives and that its history moves with it.
import path from 'node:path';
import postgres from 'postgres';
import { afterAll, beforeAll, describe, expect, it } from 'vitest';
import {
	applyMigrations,
	createScratchDatabase,
	drizzleFolder,
	dropScratchDatabase,
	migrationsFolderUpTo,
	removeFolder,
	repoRoot,
	restoreDump,
	type ScratchDatabase
} from './helpers';

const LAST_BEFORE = '0008_order-restart';
const FIXTURE = path.join(repoRoot, 'tests/fixtures/databases/demo-at-0008.sql.gz');
/** how far along an open flag is: lower is further (the order the migration keeps survivors by) */
const STATE_RANK: Record<string, number> = { recommended: 0, in_review: 1, new: 2, snoozed: 3 };
const SEVERITY_RANK: Record<string, number> = { high: 0, moderate: 1, low: 2 };

type Sql = postgres.Sql;
interface FlagRow {
	id: string;
	order_id: string;
	state: string;
	outcome: string | null;
	rule_key: string;
	severity: string;
	priority: number;
	finding: string;
	assigned_to: string | null;
}
interface EventRow {
	id: string;
	flag_id: string;
	kind: string;
	note: string | null;
	data: Record<string, unknown> | null;
}
interface FindingRow {
	id: string;
	flag_id: string;
	rule_key: string;
	severity: string;
	priority: number;
	text: string;
	resolved_at: Date | null;
	resolved_assessment_id: string | null;
	resolved_reason: string | null;
}

const client = (db: ScratchDatabase) => postgres(db.url, { max: 2, onnotice: () => {} });
const readFlags = (sql: Sql) => sql<FlagRow[]>`select id, order_id, state, outcome, rule_key, severity, priority, finding, assigned_to from flags order by id`;
const readEvents = (sql: Sql) => sql<EventRow[]>`select id::text as id, flag_id, kind, note, data from flag_events order by id`;
const readFindings = (sql: Sql) =>
	sql<
		FindingRow[]
	>`select id, flag_id, rule_key, severity, priority, text, resolved_at, resolved_assessment_id, resolved_reason from flag_findings order by id`;
const byId = <T extends { id: string }>(rows: readonly T[]) => new Map(rows.map((r) => [r.id, r]));

/** An order's open flags ranked as the migration must keep them: furthest along, then highest priority. */
function ranked(group: FlagRow[]): FlagRow[] {
	return [...group].sort((a, b) => STATE_RANK[a.state] - STATE_RANK[b.state] || b.priority - a.priority);
}

/** An open flag's worst open findings (severity, then priority): ties are equally worst. */
function worstOpenFindings(findings: FindingRow[]): FindingRow[] {
	const open = findings.filter((f) => f.resolved_at === null);
	expect(open.length).toBeGreaterThan(0);
	const worse = (a: FindingRow, b: FindingRow) => SEVERITY_RANK[a.severity] - SEVERITY_RANK[b.severity] || b.priority - a.priority;
	const sorted = [...open].sort(worse);
	return sorted.filter((f) => worse(f, sorted[0]) === 0);
}

let base: ScratchDatabase | undefined;

// One database brought to 0008 serves as the template for both cases.
beforeAll(async () => {
	const folder = migrationsFolderUpTo(LAST_BEFORE);
	try {
		base = await createScratchDatabase('base');
		await applyMigrations(base.url, folder);
	} finally {
		removeFolder(folder);
	}
});

afterAll(async () => {
	await dropScratchDatabase(base);
});

describe('0009 on the demo database at 0008', () => {
	let db: ScratchDatabase | undefined;
	let sql: Sql;
	const before = {} as {
		flags: FlagRow[];
		events: EventRow[];
		recommendations: { id: string; flag_id: string }[];
		audit: { id: string; object_type: string; object_id: string | null }[];
		/** open flags per order, for orders with more than one */
		groups: Map<string, FlagRow[]>;
	};
	const after = {} as {
		flags: Map<string, FlagRow>;
		findings: Map<string, FindingRow>;
		events: Map<string, EventRow>;
		recommendations: Map<string, { id: string; flag_id: string }>;
	};
	/** the flag holding each old flag's finding after the migration */
	const holder = (oldFlagId: string) => after.findings.get(oldFlagId)?.flag_id;

	beforeAll(async () => {
		db = await createScratchDatabase('demo', base!.name);
		restoreDump(db.url, FIXTURE);
		sql = client(db);
		before.flags = await readFlags(sql);
		before.events = await readEvents(sql);
		before.recommendations = await sql<{ id: string; flag_id: string }[]>`select id, flag_id from recommendations order by id`;
		before.audit = await sql<
			{ id: string; object_type: string; object_id: string | null }[]
		>`select id::text as id, object_type, object_id from audit_log order by id`;
		before.groups = new Map();
		for (const f of before.flags.filter((f) => f.state !== 'closed')) before.groups.set(f.order_id, [...(before.groups.get(f.order_id) ?? []), f]);
		for (const [orderId, group] of before.groups) if (group.length < 2) before.groups.delete(orderId);

		await applyMigrations(db.url, drizzleFolder);

		after.flags = byId(await readFlags(sql));
		after.findings = byId(await readFindings(sql));
		after.events = byId(await readEvents(sql));
		after.recommendations = byId(await sql<{ id: string; flag_id: string }[]>`select id, flag_id from recommendations`);
	});

	afterAll(async () => {
		await sql?.end({ timeout: 5 });
		await dropScratchDatabase(db);
	});

	it('starts from the fixture as described: 125 flags, 136 events, 3 recommendations, 21 audit rows, 24 orders with several open flags', () => {
		expect(before.flags).toHaveLength(125);
		expect(before.events).toHaveLength(136);
		expect(before.recommendations).toHaveLength(3);
		expect(before.audit).toHaveLength(21);
		expect(before.groups.size).toBe(24);
		expect(before.events.filter((e) => e.kind === 'note').length).toBeGreaterThan(0);
		// the merge must meet flags someone acted on, not only untouched ones
		const grouped = [...before.groups.values()].flat();
		expect(grouped.some((f) => f.state !== 'new' || f.assigned_to !== null)).toBe(true);
	});

	it('leaves at most one open flag per order', async () => {
		const crowded = await sql`select order_id, count(*)::int as n from flags where state <> 'closed' group by order_id having count(*) > 1`;
		expect(crowded).toEqual([]);
		const merged = [...before.groups.values()].reduce((n, g) => n + g.length - 1, 0);
		expect(after.flags.size).toBe(before.flags.length - merged);
	});

	it('turns every old flag into a finding with the same id and the same rule, severity, priority and text', () => {
		expect(after.findings.size).toBe(before.flags.length);
		for (const old of before.flags) {
			const finding = after.findings.get(old.id);
			expect(finding, `finding for flag ${old.id}`).toBeDefined();
			expect({ rule: finding!.rule_key, severity: finding!.severity, priority: finding!.priority, text: finding!.text }).toEqual({
				rule: old.rule_key,
				severity: old.severity,
				priority: old.priority,
				text: old.finding
			});
			expect(after.flags.has(finding!.flag_id), `flag holding finding ${old.id}`).toBe(true);
			expect(after.flags.get(finding!.flag_id)!.order_id).toBe(old.order_id);
		}
	});

	it('keeps closed flags as they were and gathers each order’s open flags into the furthest along', () => {
		for (const old of before.flags.filter((f) => f.state === 'closed')) {
			expect(holder(old.id)).toBe(old.id);
			expect(after.flags.get(old.id)).toMatchObject({ state: 'closed', outcome: old.outcome });
		}
		for (const [orderId, group] of before.groups) {
			const expected = ranked(group);
			const survivorId = holder(expected[0].id)!;
			const survivor = after.flags.get(survivorId)!;
			for (const f of group) expect(holder(f.id), `order ${orderId}`).toBe(survivorId);
			expect(group.map((f) => f.id)).toContain(survivorId);
			const old = group.find((f) => f.id === survivorId)!;
			expect(survivor.state).toBe(expected[0].state);
			expect(old.priority).toBe(expected[0].priority);
			for (const f of group) if (f.id !== survivorId) expect(after.flags.has(f.id), `merged flag ${f.id} is gone`).toBe(false);
			if (group.some((f) => f.assigned_to !== null)) expect(survivor.assigned_to, `order ${orderId} keeps its holder`).not.toBeNull();
		}
	});

	it('keeps every event, moving a merged flag’s events to the survivor with the finding they concern, and adds one merged event per survivor', () => {
		expect(after.events.size).toBe(before.events.length + before.groups.size);
		for (const old of before.events) {
			const now = after.events.get(old.id);
			expect(now, `event ${old.id}`).toBeDefined();
			expect(now!.flag_id).toBe(holder(old.flag_id));
			expect(after.flags.has(now!.flag_id)).toBe(true);
			expect({ kind: now!.kind, note: now!.note }).toEqual({ kind: old.kind, note: old.note });
			if (now!.flag_id === old.flag_id) expect(now!.data).toEqual(old.data);
			else expect(now!.data).toEqual({ ...(old.data ?? {}), findingId: old.flag_id });
		}
		const mergedEvents = [...after.events.values()].filter((e) => e.kind === 'merged');
		expect(mergedEvents).toHaveLength(before.groups.size);
		for (const group of before.groups.values()) {
			const survivorId = holder(group[0].id)!;
			const onSurvivor = mergedEvents.filter((e) => e.flag_id === survivorId);
			expect(onSurvivor).toHaveLength(1);
			const others = group.map((f) => f.id).filter((id) => id !== survivorId);
			expect([...(onSurvivor[0].data!.findingIds as string[])].sort()).toEqual(others.sort());
		}
	});

	it('keeps every note’s text', () => {
		const notesBefore = before.events.filter((e) => e.kind === 'note');
		const notesAfter = [...after.events.values()].filter((e) => e.kind === 'note');
		expect(notesAfter.map((e) => e.note).sort()).toEqual(notesBefore.map((e) => e.note).sort());
		for (const withNote of before.events.filter((e) => e.note !== null)) expect(after.events.get(withNote.id)!.note).toBe(withNote.note);
	});

	it('keeps every recommendation on a flag of the order it was sent for', () => {
		const oldFlags = byId(before.flags);
		expect(after.recommendations.size).toBe(before.recommendations.length);
		for (const old of before.recommendations) {
			const now = after.recommendations.get(old.id);
			expect(now, `recommendation ${old.id}`).toBeDefined();
			expect(now!.flag_id).toBe(holder(old.flag_id));
			expect(after.flags.get(now!.flag_id)!.order_id).toBe(oldFlags.get(old.flag_id)!.order_id);
		}
	});

	it('leaves the audit log untouched, each flag row still leading to a flag directly or through its finding', async () => {
		const audit = await sql<
			{ id: string; object_type: string; object_id: string | null }[]
		>`select id::text as id, object_type, object_id from audit_log order by id`;
		expect(audit).toEqual(before.audit);
		const flagRows = audit.filter((a) => a.object_type === 'flag');
		expect(flagRows.length).toBeGreaterThan(0);
		for (const row of flagRows) {
			const direct = after.flags.has(row.object_id!);
			const viaFinding = holder(row.object_id!);
			expect(direct || (viaFinding !== undefined && after.flags.has(viaFinding)), `audit row ${row.id} → ${row.object_id}`).toBe(true);
		}
		// the join the audit page uses finds them all too
		const unresolved = await sql`
			select a.id from audit_log a
			where a.object_type = 'flag'
				and not exists (select 1 from flags f where f.id::text = a.object_id::text)
				and not exists (select 1 from flag_findings ff join flags f on f.id = ff.flag_id where ff.id::text = a.object_id::text)`;
		expect(unresolved).toEqual([]);
	});

	it('heads each open flag with its worst open finding', () => {
		const findingsByFlag = new Map<string, FindingRow[]>();
		for (const f of after.findings.values()) findingsByFlag.set(f.flag_id, [...(findingsByFlag.get(f.flag_id) ?? []), f]);
		const open = [...after.flags.values()].filter((f) => f.state !== 'closed');
		expect(open.length).toBeGreaterThan(0);
		for (const flag of open) {
			const worst = worstOpenFindings(findingsByFlag.get(flag.id) ?? []);
			const headline = worst.find((f) => f.rule_key === flag.rule_key);
			expect(headline, `flag ${flag.id} is headed by ${flag.rule_key}, not one of ${worst.map((f) => f.rule_key).join(', ')}`).toBeDefined();
			expect({ severity: flag.severity, priority: flag.priority, finding: flag.finding }).toEqual({
				severity: headline!.severity,
				priority: headline!.priority,
				finding: headline!.text
			});
		}
		// the check must meet flags holding several findings (the hand-built case below covers a headline
		// that moves to a merged flag's worse finding)
		expect(open.filter((f) => (findingsByFlag.get(f.id) ?? []).length > 1)).toHaveLength(before.groups.size);
		// the merged flags' findings were open, so they stay open inside the survivor
		for (const group of before.groups.values()) for (const f of group) expect(after.findings.get(f.id)!.resolved_at).toBeNull();
	});

	it('resolves the findings of superseded flags only', () => {
		for (const old of before.flags.filter((f) => f.state === 'closed')) {
			const finding = after.findings.get(old.id)!;
			if (old.outcome === 'superseded') expect(finding.resolved_at, `superseded flag ${old.id}`).not.toBeNull();
			else expect(finding.resolved_at, `flag closed as ${old.outcome}`).toBeNull();
		}
	});
});

describe('0009 on one hand-built order: an in-review flag with a claim and a recommended flag', () => {
	let db: ScratchDatabase | undefined;
	let sql: Sql;
	const ids = {} as Record<
		'pharmacist' | 'physician' | 'order' | 'a1' | 'a2' | 'inReview' | 'recommended' | 'superseded' | 'declined' | 'recommendation',
		string
	>;
	const eventIds = {} as Record<'claim' | 'note' | 'recommendedOpened', string>;

	beforeAll(async () => {
		db = await createScratchDatabase('hand', base!.name);
		sql = client(db);
		const t0 = new Date('2026-11-20T08:00:00Z');
		const at = (h: number) => new Date(t0.getTime() + h * 3_600_000);
		const [pharmacist] = await sql`insert into users (email, display_name, role, password_hash)
			values ('pharmacist@merge.test', 'Hana Merge', 'pharmacist', 'x') returning id`;
		const [physician] = await sql`insert into users (email, display_name, role, password_hash)
			values ('physician@merge.test', 'Dr Ilse Merge', 'physician', 'x') returning id`;
		const [rules] = await sql`insert into rule_versions (version, status, rules) values (1, 'active', '[]'::jsonb) returning id`;
		const [agent] = await sql`insert into agents (code, name, agent_class, params) values ('J01DH02', 'Meropenem', 'carbapenem', '{}'::jsonb) returning id`;
		const [patient] = await sql`insert into patients (mrn, given_name, family_name, birth_date, sex)
			values ('MRG-0001', 'Rowan', 'Tessly', '1950-03-01', 'female') returning id`;
		const [order] = await sql`insert into orders (patient_id, agent_id, dose_mg, interval_h, start_at)
			values (${patient.id}, ${agent.id}, 1000, 8, ${at(-48)}) returning id`;
		const assessment = async (h: number) =>
			(
				await sql`insert into assessments (order_id, patient_id, at, complete, result, trace)
				values (${order.id}, ${patient.id}, ${at(h)}, true, '{}'::jsonb, '{}'::jsonb) returning id`
			)[0].id as string;
		const a1 = await assessment(0);
		const a2 = await assessment(24);
		const flag = async (v: {
			rule: string;
			severity: string;
			priority: number;
			state: string;
			outcome?: string;
			assignedTo?: string;
			openedH: number;
			closedH?: number;
		}) =>
			(
				await sql`insert into flags (order_id, patient_id, rule_key, rule_version_id, assessment_id, state, outcome, severity, priority,
						finding, facts, assigned_to, opened_at, closed_at)
					values (${order.id}, ${patient.id}, ${v.rule}, ${rules.id}, ${a1}, ${v.state}, ${v.outcome ?? null}, ${v.severity}, ${v.priority},
						${`${v.rule} holds`}, '{}'::jsonb, ${v.assignedTo ?? null}, ${at(v.openedH)}, ${v.closedH === undefined ? null : at(v.closedH)})
					returning id`
			)[0].id as string;
		// The in-review flag has the worse finding; the recommended one is further along and must survive.
		const inReview = await flag({ rule: 'aki', severity: 'high', priority: 120, state: 'in_review', assignedTo: pharmacist.id, openedH: 0 });
		const recommended = await flag({
			rule: 'dose-above-band',
			severity: 'moderate',
			priority: 60,
			state: 'recommended',
			assignedTo: pharmacist.id,
			openedH: 1
		});
		const superseded = await flag({ rule: 'half-life-rise', severity: 'low', priority: 20, state: 'closed', outcome: 'superseded', openedH: -24, closedH: 24 });
		const declined = await flag({ rule: 'aki', severity: 'moderate', priority: 70, state: 'closed', outcome: 'declined', openedH: -30, closedH: -6 });
		const event = async (
			flagId: string,
			kind: string,
			from: string | null,
			to: string,
			data: object,
			h: number,
			note: string | null = null,
			actor: string | null = null
		) =>
			(
				await sql`insert into flag_events (flag_id, actor_id, kind, from_state, to_state, note, data, at)
					values (${flagId}, ${actor}, ${kind}, ${from}, ${to}, ${note}, ${sql.json(data as postgres.JSONValue)}, ${at(h)}) returning id::text as id`
			)[0].id as string;
		await event(inReview, 'opened', null, 'new', { assessmentId: a1 }, 0);
		const claim = await event(inReview, 'claimed', 'new', 'new', {}, 2, null, pharmacist.id);
		await event(inReview, 'review_started', 'new', 'in_review', {}, 2.1, null, pharmacist.id);
		const note = await event(inReview, 'note', 'in_review', 'in_review', {}, 2.2, 'Called the ward: urine output down.', pharmacist.id);
		const recommendedOpened = await event(recommended, 'opened', null, 'new', { assessmentId: a1 }, 1);
		const [recommendation] = await sql`insert into recommendations (flag_id, pharmacist_id, physician_id, message, current, proposed, key_numbers,
				token_hash, token_expires_at, created_at)
			values (${recommended}, ${pharmacist.id}, ${physician.id}, 'Suggest 1 g q12h.', '{}'::jsonb, '{}'::jsonb, '{}'::jsonb,
				'merge-test-token', ${at(72)}, ${at(3)}) returning id`;
		await event(recommended, 'recommended', 'new', 'recommended', { recommendationId: recommendation.id }, 3, null, pharmacist.id);
		await event(superseded, 'opened', null, 'new', { assessmentId: a1 }, -24);
		await event(superseded, 'closed', 'new', 'closed', { outcome: 'superseded', assessmentId: a2, reason: 'half-life back within range' }, 24);
		await event(declined, 'closed', 'recommended', 'closed', { outcome: 'declined' }, -6, 'Plan to stop tomorrow.', physician.id);
		Object.assign(ids, {
			pharmacist: pharmacist.id,
			physician: physician.id,
			order: order.id,
			a1,
			a2,
			inReview,
			recommended,
			superseded,
			declined,
			recommendation: recommendation.id
		});
		Object.assign(eventIds, { claim, note, recommendedOpened });

		await applyMigrations(db.url, drizzleFolder);
	});

	afterAll(async () => {
		await sql?.end({ timeout: 5 });
		await dropScratchDatabase(db);
	});

	it('keeps the recommended flag, holding both findings, headed by the worse one', async () => {
		const open = await sql`select id, state, rule_key, severity, priority, assigned_to from flags where order_id = ${ids.order} and state <> 'closed'`;
		expect(open).toEqual([{ id: ids.recommended, state: 'recommended', rule_key: 'aki', severity: 'high', priority: 120, assigned_to: ids.pharmacist }]);
		expect(await sql`select id from flags where id = ${ids.inReview}`).toEqual([]);
		const findings = await sql`select id, resolved_at from flag_findings where flag_id = ${ids.recommended} order by priority desc`;
		expect(findings).toEqual([
			{ id: ids.inReview, resolved_at: null },
			{ id: ids.recommended, resolved_at: null }
		]);
	});

	it('moves the claim, review and note to the survivor, marked with the finding they concern', async () => {
		const moved =
			await sql`select id::text as id, kind, note, data from flag_events where flag_id = ${ids.recommended} and data->>'findingId' = ${ids.inReview} order by id`;
		expect(moved.map((e) => e.kind)).toEqual(['opened', 'claimed', 'review_started', 'note']);
		expect(moved.find((e) => e.kind === 'claimed')).toMatchObject({ id: eventIds.claim, data: { findingId: ids.inReview } });
		expect(moved.find((e) => e.kind === 'note')).toMatchObject({ id: eventIds.note, note: 'Called the ward: urine output down.' });
		const [own] = await sql`select flag_id, data from flag_events where id = ${eventIds.recommendedOpened}`;
		expect(own).toEqual({ flag_id: ids.recommended, data: { assessmentId: ids.a1 } });
		const merged = await sql`select data from flag_events where flag_id = ${ids.recommended} and kind = 'merged'`;
		expect(merged).toHaveLength(1);
		expect(merged[0].data).toMatchObject({ findingIds: [ids.inReview] });
	});

	it('keeps the recommendation on the survivor', async () => {
		expect(await sql`select flag_id from recommendations where id = ${ids.recommendation}`).toEqual([{ flag_id: ids.recommended }]);
	});

	it('resolves the superseded flag’s finding at the assessment that closed it, and leaves the declined one’s open', async () => {
		const closed = await sql`select f.id, f.state, f.outcome, ff.flag_id, ff.resolved_at is not null as resolved, ff.resolved_assessment_id, ff.resolved_reason
			from flags f join flag_findings ff on ff.id = f.id where f.id in ${sql([ids.superseded, ids.declined])} order by f.priority`;
		expect(closed).toEqual([
			{
				id: ids.superseded,
				state: 'closed',
				outcome: 'superseded',
				flag_id: ids.superseded,
				resolved: true,
				resolved_assessment_id: ids.a2,
				resolved_reason: 'half-life back within range'
			},
			{ id: ids.declined, state: 'closed', outcome: 'declined', flag_id: ids.declined, resolved: false, resolved_assessment_id: null, resolved_reason: null }
		]);
	});
});
