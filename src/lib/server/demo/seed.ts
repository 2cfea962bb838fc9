import { seedUsers } from './seed-users';
import { seedDefaultVersion } from '../rules';

/** Everything `npm start` seeds; each step is idempotent. */
export async function seedDemo() {
	const usersAdded = await seedUsers();
	const rulesSeeded = await seedDefaultVersion();
	return { 'users added': usersAdded, 'default rule set seeded': rulesSeeded ? 1 : 0 };
}
