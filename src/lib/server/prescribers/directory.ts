// The prescriber directory: who writes the orders, filled from the feed (FHIR Practitioner and
// PractitionerRole, CSV e-mail columns). A prescriber needs no Ebbline account; recommendations
// reach them by e-mail. When a prescriber's e-mail is an active physician account's, the two are
// linked (prescribers.user_id, and the account on their orders).
import { and, asc, count, eq, ilike, inArray, isNull, or, sql, type SQL } from 'drizzle-orm';
import { getDb, type Database, type Tx } from '../db';
import { prescriberIdentifiers, prescriberRoles, prescribers, users } from '../db/schema';

type DbOrTx = Database | Tx;

export type Identifier = { system: string; value: string };
/** A prescriber as the feed describes them; `field` names where each identifier was, for messages. */
export type FeedPrescriber = {
	name: string;
	/** false when `name` stands in for a missing one: it does not replace a name on record */
	named: boolean;
	identifiers: (Identifier & { field?: string })[];
	email: string | null;
	emailProblem: string | null;
};

export type SaveOutcome = { ok: true; id: string; change: 'created' | 'updated' | 'unchanged'; notes: string[] } | { ok: false; field: string; reason: string };

const identifierLabel = (i: Identifier) => (i.system ? `${i.system}|${i.value}` : i.value);

function identifiersIn(list: Identifier[]): SQL {
	return sql`(${prescriberIdentifiers.system}, ${prescriberIdentifiers.value}) in (${sql.join(
		list.map((i) => sql`(${i.system}, ${i.value})`),
		sql`, `
	)})`;
}

// a column inside a subquery is written qualified: drizzle renders ${prescribers.id} as a bare "id" there
const PRESCRIBER_ID = sql.raw('"prescribers"."id"');
const hasNoIdentifiers = sql`not exists (select 1 from prescriber_identifiers pi where pi.prescriber_id = ${PRESCRIBER_ID})`;
const sameEmail = (email: string) => sql`lower(${prescribers.email}) = ${email.toLowerCase()}`;

/** The prescriber this identifier names; `anySystem` matches the value under any system when exactly one prescriber has it. */
export async function findIdByIdentifier(db: DbOrTx, identifier: Identifier, anySystem = false): Promise<string | null> {
	const rows = await db
		.selectDistinct({ id: prescriberIdentifiers.prescriberId })
		.from(prescriberIdentifiers)
		.where(anySystem ? eq(prescriberIdentifiers.value, identifier.value) : identifiersIn([identifier]))
		.limit(2);
	return rows.length === 1 ? rows[0].id : null;
}

/** The prescriber of a PractitionerRole on record (by its identifier, or PractitionerRole/<id>). */
export async function findIdByRoleKey(db: DbOrTx, sourceKey: string): Promise<string | null> {
	const [row] = await db.select({ id: prescriberRoles.prescriberId }).from(prescriberRoles).where(eq(prescriberRoles.sourceKey, sourceKey));
	return row?.id ?? null;
}

/** The earliest prescriber with this e-mail (any case), or null. */
export async function findIdByEmail(db: DbOrTx, email: string): Promise<string | null> {
	const [row] = await db.select({ id: prescribers.id }).from(prescribers).where(sameEmail(email)).orderBy(asc(prescribers.createdAt)).limit(1);
	return row?.id ?? null;
}

/**
 * The prescriber with this e-mail, added when there is none (named after the matching physician
 * account, else the address, until a message names them). A prescriber named only by their address
 * takes the name when one is given.
 */
export async function findOrCreateByEmail(db: DbOrTx, email: string, name: string | null): Promise<{ id: string; created: boolean }> {
	const address = email.trim().toLowerCase();
	const [found] = await db
		.select({ id: prescribers.id, name: prescribers.name, email: prescribers.email })
		.from(prescribers)
		.where(sameEmail(address))
		.orderBy(asc(prescribers.createdAt))
		.limit(1);
	if (found) {
		if (name && found.name.toLowerCase() === address) await db.update(prescribers).set({ name }).where(eq(prescribers.id, found.id));
		return { id: found.id, created: false };
	}
	const [account] = await db
		.select({ displayName: users.displayName })
		.from(users)
		.where(and(sql`lower(${users.email}) = ${address}`, eq(users.role, 'physician'), eq(users.active, true)));
	const [row] = await db
		.insert(prescribers)
		.values({ name: name ?? account?.displayName ?? address, email: address })
		.returning({ id: prescribers.id });
	return { id: row.id, created: true };
}

/** Who a prescriber from the feed is on record: by identifier, else (when they carry none on record) by e-mail or name. */
async function matchOnRecord(db: DbOrTx, p: FeedPrescriber): Promise<{ id: string | null; found: Identifier[] } | { field: string; reason: string }> {
	const found = p.identifiers.length
		? await db
				.select({
					prescriberId: prescriberIdentifiers.prescriberId,
					system: prescriberIdentifiers.system,
					value: prescriberIdentifiers.value,
					name: prescribers.name
				})
				.from(prescriberIdentifiers)
				.innerJoin(prescribers, eq(prescribers.id, prescriberIdentifiers.prescriberId))
				.where(identifiersIn(p.identifiers))
		: [];
	const ownerOf = (i: Identifier) => found.find((f) => f.system === i.system && f.value === i.value);
	const owners = new Set(found.map((f) => f.prescriberId));
	if (owners.size > 1) {
		const known = p.identifiers.filter((i) => ownerOf(i));
		const first = known[0];
		const other = known.find((i) => ownerOf(i)?.prescriberId !== ownerOf(first)?.prescriberId) as (typeof known)[number];
		const field = other.field ?? 'identifier';
		return {
			field,
			reason: `${field} ${identifierLabel(other)} names ${ownerOf(other)?.name} on record, but ${first.field ?? 'identifier'} ${identifierLabel(first)} names ${ownerOf(first)?.name}: one identifier must name one prescriber`
		};
	}
	if (owners.size === 1) return { id: [...owners][0], found };
	const byEmail = p.email
		? await db
				.select({ id: prescribers.id })
				.from(prescribers)
				.where(and(sameEmail(p.email), hasNoIdentifiers))
				.orderBy(asc(prescribers.createdAt))
				.limit(1)
		: p.identifiers.length === 0
			? await db
					.select({ id: prescribers.id })
					.from(prescribers)
					.where(and(eq(prescribers.name, p.name), isNull(prescribers.email), hasNoIdentifiers))
					.limit(1)
			: [];
	return { id: byEmail[0]?.id ?? null, found };
}

/**
 * Stores a prescriber from the feed, idempotently: the same content again changes nothing; a changed
 * name or e-mail updates; new identifiers are added. A message without a usable e-mail keeps the
 * address on record rather than erase it. An identifier that names another prescriber on record is
 * refused with the field.
 */
export async function saveFromFeed(db: DbOrTx, p: FeedPrescriber): Promise<SaveOutcome> {
	const match = await matchOnRecord(db, p);
	if ('reason' in match) return { ok: false, ...match };
	const notes: string[] = [];
	const newIdentifiers = p.identifiers.filter((i) => !match.found.some((f) => f.system === i.system && f.value === i.value));
	if (match.id === null) {
		const [row] = await db
			.insert(prescribers)
			.values({ name: p.name, email: p.email, emailProblem: p.email ? null : p.emailProblem })
			.returning({ id: prescribers.id });
		await addIdentifiers(db, row.id, newIdentifiers);
		return { ok: true, id: row.id, change: 'created', notes };
	}
	const [current] = await db
		.select({ name: prescribers.name, email: prescribers.email, emailProblem: prescribers.emailProblem })
		.from(prescribers)
		.where(eq(prescribers.id, match.id));
	const name = p.named ? p.name : current.name;
	const email = p.email ?? current.email;
	const emailProblem = email ? null : p.emailProblem;
	if (!p.email && current.email) notes.push(`telecom: no usable e-mail (${p.emailProblem ?? 'none given'}); the address on record, ${current.email}, is kept`);
	const changed = name !== current.name || email !== current.email || emailProblem !== current.emailProblem;
	if (changed) await db.update(prescribers).set({ name, email, emailProblem }).where(eq(prescribers.id, match.id));
	await addIdentifiers(db, match.id, newIdentifiers);
	return { ok: true, id: match.id, change: changed || newIdentifiers.length > 0 ? 'updated' : 'unchanged', notes };
}

async function addIdentifiers(db: DbOrTx, prescriberId: string, list: Identifier[]) {
	if (list.length === 0) return;
	// no "on conflict do nothing": an identifier taken meanwhile by another message fails the transaction, which is retried
	await db.insert(prescriberIdentifiers).values(list.map((i) => ({ prescriberId, system: i.system, value: i.value })));
}

export type FeedRole = {
	sourceKey: string;
	role: string | null;
	specialty: string | null;
	organization: string | null;
	email: string | null;
	active: boolean | null;
};

/** Stores a PractitionerRole by its source key; the same content again changes nothing. */
export async function saveRole(db: DbOrTx, prescriberId: string, r: FeedRole): Promise<'created' | 'updated' | 'unchanged'> {
	const active = r.active === null ? null : String(r.active);
	const rows = Array.from(
		(await db.execute(sql`
			insert into prescriber_roles (prescriber_id, source_key, role, specialty, organization, email, active)
			values (${prescriberId}::uuid, ${r.sourceKey}, ${r.role}, ${r.specialty}, ${r.organization}, ${r.email}, ${active})
			on conflict (source_key) do update set prescriber_id = excluded.prescriber_id, role = excluded.role, specialty = excluded.specialty,
				organization = excluded.organization, email = excluded.email, active = excluded.active, updated_at = now()
			where (prescriber_roles.prescriber_id, prescriber_roles.role, prescriber_roles.specialty, prescriber_roles.organization, prescriber_roles.email, prescriber_roles.active)
				is distinct from (excluded.prescriber_id, excluded.role, excluded.specialty, excluded.organization, excluded.email, excluded.active)
			returning (xmax = 0) as inserted`)) as unknown as Iterable<{ inserted: boolean }>
	);
	return rows.length === 0 ? 'unchanged' : rows[0].inserted ? 'created' : 'updated';
}

/** Gives a prescriber with no e-mail on record the address of one of their roles; true when it did. */
export async function useRoleEmail(db: DbOrTx, prescriberId: string, email: string): Promise<boolean> {
	const rows = await db
		.update(prescribers)
		.set({ email, emailProblem: null })
		.where(and(eq(prescribers.id, prescriberId), isNull(prescribers.email)))
		.returning({ id: prescribers.id });
	return rows.length > 0;
}

/**
 * Links prescribers to the active physician account with the same e-mail (any case), and gives
 * their orders that account where they have none. Returns how many prescribers were linked.
 */
export async function linkAccounts(db: DbOrTx, prescriberIds: string[]): Promise<number> {
	if (prescriberIds.length === 0) return 0;
	const ids = sql.join(
		[...new Set(prescriberIds)].map((id) => sql`${id}::uuid`),
		sql`, `
	);
	const linked = Array.from(
		(await db.execute(sql`
			update prescribers p set user_id = u.id, updated_at = now()
			from users u
			where p.id in (${ids}) and p.email is not null and lower(u.email) = lower(p.email)
				and u.role = 'physician' and u.active and p.user_id is distinct from u.id
			returning p.id`)) as unknown as Iterable<{ id: string }>
	);
	// the order's prescriber account follows the directory; updated_at is left alone: the regimen did not change
	await db.execute(sql`
		update orders o set prescriber_id = p.user_id
		from prescribers p
		where o.practitioner_id = p.id and p.id in (${ids}) and p.user_id is not null and o.prescriber_id is null`);
	return linked.length;
}

/** After an account is created or changes its e-mail: the prescribers with that address become linked to it. */
export async function linkAccountByEmail(db: DbOrTx, email: string): Promise<number> {
	const rows = await db.select({ id: prescribers.id }).from(prescribers).where(sameEmail(email));
	return linkAccounts(
		db,
		rows.map((r) => r.id)
	);
}

/** Name, e-mail and linked account of each prescriber, for the orders that name them. */
export async function summaries(db: DbOrTx, ids: string[]) {
	if (ids.length === 0) return new Map<string, { name: string; email: string | null; userId: string | null }>();
	const rows = await db
		.select({ id: prescribers.id, name: prescribers.name, email: prescribers.email, userId: prescribers.userId })
		.from(prescribers)
		.where(inArray(prescribers.id, [...new Set(ids)]));
	return new Map(rows.map((r) => [r.id, { name: r.name, email: r.email, userId: r.userId }]));
}

/** One page of the directory, by name; `search` matches name or e-mail. */
export async function list(options: { search?: string; limit?: number; offset?: number } = {}, db: DbOrTx = getDb()) {
	const search = options.search?.trim();
	const where = search ? or(ilike(prescribers.name, `%${search}%`), ilike(prescribers.email, `%${search}%`)) : undefined;
	const [rows, [{ total }]] = await Promise.all([
		db
			.select({
				id: prescribers.id,
				name: prescribers.name,
				email: prescribers.email,
				emailProblem: prescribers.emailProblem,
				hasAccount: sql<boolean>`"prescribers"."user_id" is not null`,
				identifiers: sql<
					string[]
				>`coalesce((select array_agg(case when pi.system = '' then pi.value else pi.system || '|' || pi.value end order by pi.system, pi.value)
					from prescriber_identifiers pi where pi.prescriber_id = ${PRESCRIBER_ID}), '{}')`,
				specialties: sql<string[]>`coalesce((select array_agg(distinct pr.specialty) from prescriber_roles pr
					where pr.prescriber_id = ${PRESCRIBER_ID} and pr.specialty is not null), '{}')`,
				activeOrders: sql<number>`(select count(*)::int from orders o where o.practitioner_id = ${PRESCRIBER_ID} and o.status = 'active')`
			})
			.from(prescribers)
			.where(where)
			.orderBy(asc(prescribers.name), asc(prescribers.id))
			.limit(options.limit ?? 50)
			.offset(options.offset ?? 0),
		db.select({ total: count() }).from(prescribers).where(where)
	]);
	return { rows, total };
}
