import { readFileSync } from 'node:fs';
import { getDb } from '../db';
import { users } from '../db/schema';
import { hashPassword } from '../auth';
import type { Role } from '../../roles';

type DemoUsers = { password: string; users: { email: string; displayName: string; role: Role }[] };

export function demoUsers(): DemoUsers {
	return JSON.parse(readFileSync(new URL('../../../../fixtures/demo-users.json', import.meta.url), 'utf8'));
}

/** Inserts the invented Larkspur Bay staff; existing accounts are left as they are. */
export async function seedUsers() {
	const demo = demoUsers();
	const passwordHash = await hashPassword(demo.password);
	const rows = await getDb()
		.insert(users)
		.values(demo.users.map((u) => ({ ...u, passwordHash })))
		.onConflictDoNothing({ target: users.email })
		.returning({ id: users.id });
	return rows.length;
}
