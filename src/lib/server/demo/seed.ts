import { seedUsers } from './seed-users';

/** Everything `npm start` seeds; each step is idempotent. */
export async function seedDemo() {
	const usersAdded = await seedUsers();
	return { 'users added': usersAdded };
}
