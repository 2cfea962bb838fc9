// What a production start checks before it serves: no demo staff account and no demo patient data in
// the database. The demo (npm start) seeds invented people with a published password; a hospital's
// database must never hold them.
import { inArray, like, or, sql } from 'drizzle-orm';
import { demoUsers } from '../demo/seed-users';
import type { DbOrTx } from '../db';
import { users } from '../db/schema';

/** The demo staff's e-mail domain (fixtures/demo-users.json); no real hospital uses the .test domain. */
export const DEMO_EMAIL_DOMAIN = '@larkspur.test';

export type DemoContent = {
	/** demo staff accounts (active or not) */
	accounts: string[];
	/** feed messages written by the demo seed or the simulator */
	demoMessages: number;
};

export async function demoContent(db: DbOrTx): Promise<DemoContent> {
	const demoEmails = demoUsers().users.map((u) => u.email.toLowerCase());
	const accounts = await db
		.select({ email: users.email })
		.from(users)
		.where(or(inArray(users.email, demoEmails), like(users.email, `%${DEMO_EMAIL_DOMAIN}`)))
		.orderBy(users.email);
	const [row] = Array.from(
		(await db.execute(sql`select count(*)::int as n from feed_messages where source in ('seed', 'simulator')`)) as unknown as Iterable<{ n: number }>
	);
	return { accounts: accounts.map((a) => a.email), demoMessages: row.n };
}

export const isDemoContent = (c: DemoContent) => c.accounts.length > 0 || c.demoMessages > 0;

/** The production pre-flight: null when the database may be served, else what to do, in words. */
export async function productionRefusal(db: DbOrTx): Promise<string | null> {
	const c = await demoContent(db);
	if (!isDemoContent(c)) return null;
	const lines = ['This database holds demo content; a production start refuses to serve it.'];
	if (c.accounts.length > 0) {
		lines.push(`Demo accounts (${c.accounts.length}): ${c.accounts.join(', ')}.`);
		lines.push(`Remove them: delete from users where email like '%${DEMO_EMAIL_DOMAIN}';  (or start from an empty database)`);
	}
	if (c.demoMessages > 0) {
		lines.push(`${c.demoMessages} feed message(s) from the demo seed or simulator: the invented Larkspur Bay patients are here. Use an empty database for production.`);
	}
	return lines.join('\n');
}
