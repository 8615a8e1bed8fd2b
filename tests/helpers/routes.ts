/** The app's route ids, found from the route tree (src/routes), as SvelteKit names them. */
import { readdirSync, statSync } from 'node:fs';
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
