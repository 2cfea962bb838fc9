import { sveltekit } from '@sveltejs/kit/vite';
import tailwindcss from '@tailwindcss/vite';
import { defineConfig } from 'vitest/config';

export default defineConfig({
	plugins: [tailwindcss(), sveltekit()],
	server: { host: '127.0.0.1', port: 5173 },
	preview: { host: '127.0.0.1' },
	test: {
		projects: [
			{
				extends: true,
				test: {
					name: 'unit',
					include: ['tests/unit/**/*.test.ts'],
					environment: 'node'
				}
			},
			{
				extends: true,
				test: {
					name: 'integration',
					include: ['tests/integration/**/*.test.ts'],
					environment: 'node',
					// Each file gets its own database cloned from the migrated template (setup-database.ts), so files
					// never see each other's rows; they still run one at a time because several start workers and
					// time their own work, and would compete for the machine's cores and connections.
					fileParallelism: false,
					testTimeout: 60_000,
					hookTimeout: 60_000,
					setupFiles: ['tests/integration/setup-database.ts', 'tests/integration/setup-queues.ts']
				}
			}
		]
	}
});
