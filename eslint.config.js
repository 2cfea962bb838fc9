// ESLint for the house style: typescript-eslint's recommended rules, eslint-plugin-svelte's for
// components, and Prettier owning layout (eslint-config-prettier turns off what it decides).
import js from '@eslint/js';
import prettier from 'eslint-config-prettier';
import svelte from 'eslint-plugin-svelte';
import globals from 'globals';
import ts from 'typescript-eslint';
import svelteConfig from './svelte.config.js';

export default ts.config(
	{ ignores: ['node_modules/', '.svelte-kit/', 'build/', '.data/', 'test-results/', 'playwright-report/', 'bench/', 'drizzle/', 'static/'] },
	js.configs.recommended,
	...ts.configs.recommended,
	...svelte.configs.recommended,
	prettier,
	...svelte.configs.prettier,
	{
		languageOptions: { globals: { ...globals.browser, ...globals.node } },
		rules: {
			// an unused name is an error unless it says it is unused on purpose
			// Ebbline is served at the root path, so links and goto() take plain paths, not resolve()
			'svelte/no-navigation-without-resolve': 'off',
			// URLSearchParams, Map and Date built inside a function to make a link or a value are not
			// component state; state lives in $state, so the Svelte* wrappers add nothing
			'svelte/prefer-svelte-reactivity': 'off',
			// {' '} keeps a space between inline elements that Prettier would otherwise move
			'svelte/no-useless-mustaches': 'off',
			'@typescript-eslint/no-unused-vars': ['error', { argsIgnorePattern: '^_', varsIgnorePattern: '^_', caughtErrorsIgnorePattern: '^_' }]
		}
	},
	{
		files: ['**/*.svelte', '**/*.svelte.ts', '**/*.svelte.js'],
		languageOptions: { parserOptions: { projectService: true, extraFileExtensions: ['.svelte'], parser: ts.parser, svelteConfig } }
	}
);
