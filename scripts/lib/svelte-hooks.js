/**
 * Node module hooks (module.register) that compile a .svelte file for the server on import, with
 * the project's own `svelte/compiler` (generate: 'server'). tsx does not compile .svelte, and the
 * worker renders the review e-mail bodies with Svelte components (src/lib/server/mail/reminders/).
 * Registered by scripts/worker.ts before it imports the renderer; the app and vitest compile
 * .svelte through Vite instead. TypeScript in a component's <script lang="ts"> is type annotations
 * only (the Svelte compiler strips them); no preprocessing runs here.
 */
import { readFile } from 'node:fs/promises';
import { fileURLToPath } from 'node:url';
import { compile } from 'svelte/compiler';

export async function load(url, context, nextLoad) {
	if (!url.startsWith('file:') || !url.endsWith('.svelte')) return nextLoad(url, context);
	const filename = fileURLToPath(url);
	const { js, warnings } = compile(await readFile(filename, 'utf8'), { filename, generate: 'server', dev: false });
	for (const w of warnings) console.error(`[svelte] ${filename}: ${w.message}`);
	return { format: 'module', source: js.code, shortCircuit: true };
}
