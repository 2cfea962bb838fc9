import { sveltekit } from '@sveltejs/kit/vite';
import tailwindcss from '@tailwindcss/vite';
import { defineConfig } from 'vitest/config';
import { onBundlerLog } from './scripts/lib/build-logs.js';

export default defineConfig(({ command }) => ({
	plugins: [tailwindcss(), sveltekit()],
	server: { host: '127.0.0.1', port: 5173 },
	preview: { host: '127.0.0.1' },
	// A build prints its warnings and errors, not a table of every output file: `npm start`, `npm test` and
	// the bench build on every run, and the table buried the warnings. The dev server keeps its address line.
	logLevel: command === 'build' ? 'warn' : 'info',
	build: {
		// the gzip sizes cost seconds per build and nobody reads them (the app is served on a hospital network)
		reportCompressedSize: false,
		rolldownOptions: {
			// the per-plugin timing report: for profiling a slow build, not for every build
			checks: { bundlerTimings: false },
			// warnings that only name files inside node_modules are dropped; the project's own are printed (scripts/lib/build-logs.js)
			onLog: onBundlerLog
		}
	},
	test: {
		projects: [
			{
				extends: true,
				test: {
					name: 'unit',
					include: ['tests/unit/**/*.test.ts'],
					environment: 'node',
					// property tests are CPU-bound (under a second alone) and slow many-fold when the machine is busy;
					// the limit is there to catch a hang, not to time them
					testTimeout: 30_000
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
}));
