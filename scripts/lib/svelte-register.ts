/**
 * Registers ./svelte-hooks.js, so a .svelte file imported afterwards (by dynamic import: static
 * imports are loaded before any code runs) is compiled for the server. Idempotent.
 */
import { register } from 'node:module';

let done = false;
export function registerSvelteHooks(): void {
	if (done) return;
	register('./svelte-hooks.js', import.meta.url);
	done = true;
}
