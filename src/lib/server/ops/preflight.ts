// What a production start checks before it serves: no usable demo staff account and no demo patient
// data in the database. The demo (npm start) seeds invented people with a published password and
// invented patients; a hospital's database must never hold them.
import { randomBytes } from 'node:crypto';
import { sql } from 'drizzle-orm';
import type { DbOrTx } from '../db';
import { demoUsers } from '../demo';
import { verifyPassword, users as userService } from '../auth';

/**
 * A demo account: any address in the reserved `.test` top-level domain (RFC 2606; it cannot receive
 * mail, so no real person signs in with one) — the demo staff are all `@larkspur.test`
 * (fixtures/demo-users.json) — or any address the demo fixture lists.
 */
export const DEMO_EMAIL_SUFFIX = '.test';

/**
 * Demo patients carry the generator's identifiers: a FHIR Patient.id `lbh-…` together with an MRN
 * `LBH` + 7 digits (src/lib/server/demo/hospital.ts). Both must match, so a hospital whose MRNs
 * happen to start with LBH is not taken for the demo.
 */
const DEMO_PATIENT = sql`source_id like 'lbh-%' and mrn ~ '^LBH[0-9]{7}$'`;

export type DemoAccount = {
	email: string;
	active: boolean;
	/** the demo's published password still signs this account in (if it were active) */
	publishedPassword: boolean;
};

export type DemoContent = {
	accounts: DemoAccount[];
	/** feed messages written by the demo seed or the simulator */
	demoMessages: number;
	/** patients with the demo generator's identifiers */
	demoPatients: number;
};

const rows = async <T>(db: DbOrTx, query: ReturnType<typeof sql>) => Array.from((await db.execute(query)) as unknown as Iterable<T>);

/** What the database holds of the demo; an empty (not yet migrated) database holds nothing. */
export async function demoContent(db: DbOrTx): Promise<DemoContent> {
	const [tables] = await rows<{ users: boolean; feed: boolean; patients: boolean }>(
		db,
		sql`select to_regclass('public.users') is not null as users, to_regclass('public.feed_messages') is not null as feed, to_regclass('public.patients') is not null as patients`
	);
	const demo = demoUsers();
	const fixtureEmails = demo.users.map((u) => u.email.toLowerCase());
	const found = tables.users
		? await rows<{ email: string; active: boolean; password_hash: string }>(
				db,
				sql`select email, active, password_hash from users
				    where lower(email) like ${'%' + DEMO_EMAIL_SUFFIX} or lower(email) in (${sql.join(
							fixtureEmails.map((e) => sql`${e}`),
							sql`, `
						)})
				    order by email`
			)
		: [];
	const accounts: DemoAccount[] = [];
	for (const row of found) {
		// an active demo account is refused whatever its password; a deactivated one only while the
		// published password would let it back in the moment someone reactivates it
		const publishedPassword = row.active ? true : await verifyPassword(row.password_hash, demo.password);
		accounts.push({ email: row.email, active: row.active, publishedPassword });
	}
	const [messages] = tables.feed
		? await rows<{ n: number }>(db, sql`select count(*)::int as n from feed_messages where source in ('seed', 'simulator')`)
		: [{ n: 0 }];
	const [patients] = tables.patients ? await rows<{ n: number }>(db, sql`select count(*)::int as n from patients where ${DEMO_PATIENT}`) : [{ n: 0 }];
	return { accounts, demoMessages: messages.n, demoPatients: patients.n };
}

/** Demo accounts a production start refuses: active ones, and deactivated ones that still have the published password. */
export const blockingAccounts = (c: DemoContent) => c.accounts.filter((a) => a.active || a.publishedPassword);

/** Any trace of the demo at all: what makes a database "already a demo database" for npm start. */
export const isDemoContent = (c: DemoContent) => c.accounts.length > 0 || c.demoMessages > 0 || c.demoPatients > 0;

/** The production pre-flight: null when the database may be served, else what was found and what to do, in words. */
export async function productionRefusal(db: DbOrTx): Promise<string | null> {
	const c = await demoContent(db);
	const accounts = blockingAccounts(c);
	if (accounts.length === 0 && c.demoMessages === 0 && c.demoPatients === 0) return null;
	const lines = ['This database holds demo content; the production start refuses to serve it.'];
	if (accounts.length > 0) {
		const described = accounts.map((a) => (a.active ? a.email : `${a.email} (deactivated, still with the published demo password)`));
		lines.push(`Demo accounts (${accounts.length}): ${described.join(', ')}.`);
		lines.push(`  Remove them: psql "$DATABASE_URL" -c "delete from users where lower(email) like '%${DEMO_EMAIL_SUFFIX}'"`);
		lines.push('  (refused by a foreign key once an account has signed in or acted — the audit log keeps its history);');
		lines.push('  or deactivate them and replace their password with a random one (audited): npm run demo:retire-accounts');
	}
	if (c.demoMessages > 0 || c.demoPatients > 0) {
		lines.push(
			`Demo patients: ${c.demoPatients} patient(s) with the demo generator's identifiers (Patient.id lbh-…, MRN LBH…) and ` +
				`${c.demoMessages} feed message(s) from the demo seed or simulator.`
		);
		lines.push('  This database has been used as the demo (npm start). Serve the hospital from a new, empty database:');
		lines.push('  createdb ebbline_production, point DATABASE_URL at it, npm run admin:create, npm run serve.');
	}
	return lines.join('\n');
}

/**
 * Deactivates every demo account that could still sign in and replaces its password with a random
 * one nobody knows, through the user services (each change audited, sessions ended).
 */
export async function retireDemoAccounts(db: DbOrTx, who: userService.Actor): Promise<string[]> {
	const retired: string[] = [];
	for (const account of blockingAccounts(await demoContent(db))) {
		const [row] = await rows<{ id: string }>(db, sql`select id from users where email = ${account.email}`);
		if (account.active) await userService.update(row.id, { active: false }, who);
		await userService.resetPassword(row.id, randomBytes(32).toString('base64url'), who);
		retired.push(account.email);
	}
	return retired;
}
