/** The app's route ids, found from the route tree (src/routes), as SvelteKit names them. */
import { readdirSync, readFileSync, statSync } from 'node:fs';
import { join, relative, sep } from 'node:path';

const ROUTE_FILES = /^\+(page|page\.server|server|layout\.server)\.(ts|js|svelte)$/;

export function routeIds(root = 'src/routes'): { id: string; files: string[] }[] {
	const out = new Map<string, string[]>();
	const walk = (dir: string) => {
		for (const name of readdirSync(dir)) {
			const p = join(dir, name);
			if (statSync(p).isDirectory()) walk(p);
			else if (ROUTE_FILES.test(name) && !name.startsWith('+layout')) {
				const rel = relative(root, dir).split(sep).join('/');
				const id = '/' + rel;
				const key = id === '/' ? '/' : id.replace(/\/$/, '');
				out.set(key, [...(out.get(key) ?? []), name]);
			}
		}
	};
	walk(root);
	return [...out].map(([id, files]) => ({ id: id === '/.' ? '/' : id, files })).sort((a, b) => a.id.localeCompare(b.id));
}

/** A concrete path for a route id, with every parameter filled in. */
export function samplePath(id: string, params: Record<string, string> = {}): string {
	return (
		id
			.replace(/\/\([^)]+\)/g, '')
			.replace(/\[\.\.\.(\w+)\]/g, (_, n) => params[n] ?? 'x')
			.replace(/\[\[?(\w+)(=\w+)?\]?\]/g, (_, n) => params[n] ?? '999999') || '/'
	);
}

const METHODS = ['GET', 'POST', 'PUT', 'PATCH', 'DELETE'] as const;
export type Method = (typeof METHODS)[number];
export const ALL_METHODS: readonly Method[] = METHODS;

/**
 * The HTTP methods a route implements, read from its files: a page answers GET, a page with
 * `export const actions` answers POST, an endpoint answers the methods it exports. Named form
 * actions are listed too (`?/name`), read from the actions object.
 */
export function routeMethods(id: string, root = 'src/routes'): { methods: Method[]; actions: string[] } {
	const dir = join(root, ...id.split('/').filter(Boolean));
	const methods = new Set<Method>();
	const actions: string[] = [];
	for (const name of readdirSync(dir)) {
		const p = join(dir, name);
		if (statSync(p).isDirectory()) continue;
		const text = readFileSync(p, 'utf8');
		if (/^\+page(\.server)?\.(ts|js|svelte)$/.test(name)) methods.add('GET');
		if (/^\+page\.server\.(ts|js)$/.test(name)) {
			const m = /export const actions[^=]*=\s*\{([\s\S]*)\};?\s*$/m.exec(text);
			if (m) {
				methods.add('POST');
				for (const a of m[1].matchAll(/^\t(\w+):\s*async/gm)) if (a[1] !== 'default') actions.push(a[1]);
			}
		}
		if (/^\+server\.(ts|js)$/.test(name)) {
			for (const x of text.matchAll(/export (?:const|async function|function) (GET|POST|PUT|PATCH|DELETE)\b/g)) methods.add(x[1] as Method);
		}
	}
	return { methods: METHODS.filter((m) => methods.has(m)), actions };
}
