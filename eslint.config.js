// ESLint flat config: typescript-eslint's and eslint-plugin-svelte's recommended rules, with
// formatting left to Prettier (eslint-config-prettier turns the stylistic rules off).
import js from '@eslint/js';
import ts from 'typescript-eslint';
import svelte from 'eslint-plugin-svelte';
import prettier from 'eslint-config-prettier';
import globals from 'globals';
import svelteConfig from './svelte.config.js';

export default ts.config(
	{ ignores: ['.data/', '.svelte-kit/', '.bench/', 'build/', 'node_modules/', 'test-results/', 'static/'] },
	js.configs.recommended,
	...ts.configs.recommended,
	...svelte.configs.recommended,
	prettier,
	...svelte.configs.prettier,
	{ languageOptions: { globals: { ...globals.browser, ...globals.node } } },
	{
		files: ['**/*.svelte', '**/*.svelte.ts'],
		languageOptions: { parserOptions: { extraFileExtensions: ['.svelte'], parser: ts.parser, svelteConfig } }
	},
	{
		rules: {
			// `_name` marks an argument or binding that is unused on purpose
			'@typescript-eslint/no-unused-vars': ['error', { argsIgnorePattern: '^_', varsIgnorePattern: '^_', caughtErrors: 'none' }],
			// The app is served at the root (no `paths.base`), so `resolve()` around every link adds nothing.
			'svelte/no-navigation-without-resolve': 'off'
		}
	}
);
