import { seedUsers } from './seed-users';
import { seedAgents, seedHospital } from './seed-hospital';
import { seedDefaultVersion } from '../rules';

/** Everything `npm start` seeds; each step is idempotent. */
export async function seedDemo() {
	const usersAdded = await seedUsers();
	const rulesSeeded = await seedDefaultVersion();
	// agents before the hospital (its orders name them); the hospital after the rules (its assessments are evaluated)
	const agentsSeeded = await seedAgents();
	const hospital = await seedHospital();
	return {
		'users added': usersAdded,
		'default rule set seeded': rulesSeeded ? 1 : 0,
		'agents added or updated': agentsSeeded,
		'demo patients': hospital.patients,
		'demo orders': hospital.orders,
		'demo results': hospital.results,
		assessments: hospital.assessed
	};
}
