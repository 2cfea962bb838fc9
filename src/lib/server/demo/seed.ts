import { seedUsers } from './seed-users';
import { seedAgents, seedHospital } from './seed-hospital';
import type { HistoryProgress } from './history';
import { seedDefaultVersion } from '../rules';

/** Everything `npm start` seeds; each step is idempotent. `days`: the hospital's history (0: today only). */
export async function seedDemo(options: { days?: number; now?: Date; onProgress?: (p: HistoryProgress) => void } = {}) {
	const usersAdded = await seedUsers();
	const rulesSeeded = await seedDefaultVersion();
	// agents before the hospital (its orders name them); the hospital after the rules (its assessments are evaluated)
	const agentsSeeded = await seedAgents();
	const hospital = await seedHospital(options);
	return {
		'users added': usersAdded,
		'default rule set seeded': rulesSeeded ? 1 : 0,
		'agents added or updated': agentsSeeded,
		'demo patients': hospital.patients,
		'demo orders': hospital.orders,
		'demo results': hospital.results,
		assessments: hospital.assessed,
		...('history' in hospital && hospital.history
			? {
					'days of history': hospital.history.days,
					recommendations: hospital.history.recommendations,
					'seconds for the history': hospital.history.seconds
				}
			: {})
	};
}
