import { sveltekit } from '@sveltejs/kit/vite';
import { defineConfig } from 'vitest/config';

export default defineConfig({
	plugins: [sveltekit()],
	server: { port: 5173, strictPort: false },
	test: {
		include: ['tests/**/*.test.ts'],
		environment: 'node',
		testTimeout: 30_000,
		hookTimeout: 60_000,
		// Integration and e2e tests share one database and one set of servers; scripts/test.sh runs the
		// unit tests (no services) with --fileParallelism.
		fileParallelism: false,
		reporters: ['default']
	}
});
