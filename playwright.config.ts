import { defineConfig } from '@playwright/test';

// `npm test` starts the app on a free port with a seeded database and passes its URL here.
// Chromium is Debian's (never downloaded by Playwright).
const baseURL = process.env.EBBLINE_BASE_URL ?? 'http://127.0.0.1:3000';

export default defineConfig({
	testDir: 'tests/e2e',
	// npm test gives each run its own folder (test-results/<run id>/e2e), kept when the run fails
	outputDir: process.env.EBBLINE_E2E_OUTPUT_DIR ?? 'test-results/e2e',
	fullyParallel: false,
	workers: 1,
	retries: 0,
	timeout: 60_000,
	reporter: [['list'], ['json', { outputFile: process.env.PLAYWRIGHT_JSON_OUTPUT_NAME ?? 'test-results/playwright.json' }]],
	use: {
		baseURL,
		trace: 'retain-on-failure',
		screenshot: 'only-on-failure',
		viewport: { width: 1440, height: 900 },
		launchOptions: {
			executablePath: process.env.CHROMIUM_PATH ?? '/usr/bin/chromium',
			args: [
				'--no-sandbox',
				'--disable-gpu',
				'--disable-background-networking',
				'--disable-component-update',
				'--disable-sync',
				'--no-first-run',
				'--disable-quic'
			]
		}
	},
	projects: [{ name: 'chromium', use: { browserName: 'chromium' } }]
});
