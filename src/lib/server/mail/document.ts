/**
 * An HTML e-mail from a Svelte component rendered on the server (`render` from svelte/server): every
 * value in the component is text or an attribute, so Svelte escapes it. The page around it carries
 * the background and font (inline styles only: mail clients drop <style>); the markers Svelte leaves
 * for hydration are removed (nothing hydrates an e-mail).
 *
 * The worker runs under tsx, which does not compile .svelte: scripts/worker.ts registers
 * scripts/lib/svelte-hooks.js before it imports a module that imports a component.
 */
import { render } from 'svelte/server';
import type { Component } from 'svelte';

const HYDRATION_MARKERS = /<!--[[\]!\d-]*-->/g;

export function mailDocument<P extends Record<string, unknown>>(component: Component<P>, props: P): string {
	const { body } = render(component as Component<Record<string, unknown>>, { props });
	return `<!doctype html><html><body style="margin:0;background:#f7f4ee;font-family:'IBM Plex Sans',Arial,sans-serif;color:#1d2733">${body.replace(HYDRATION_MARKERS, '')}</body></html>`;
}
