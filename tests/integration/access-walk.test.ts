/**
 * Walks every route the app defines (from the route tree) as anonymous and as each role, and
 * checks the answer against the access table. A new route without an entry fails here.
 */
import { describe, it, expect, beforeAll } from 'vitest';
import { routeIds, samplePath, routeMethods, ALL_METHODS, type Method } from '../helpers/routes';
import { ACCESS, decide, ruleFor } from '../../src/lib/server/access';
import { Client, signedIn } from '../helpers/http';
import { LEAK } from '../helpers/leaks';
import { ACCOUNTS } from '../../db/seeds/accounts';

const routes = routeIds();
const roleClients: Record<string, Client> = {};
const ROLE_USERS: Record<string, string> = {
	scorer: 'sam.scorer@demo.crosstally.test',
	reviewer: 'rita.reviewer@demo.crosstally.test',
	lead: 'lee.lead@demo.crosstally.test',
	admin: 'ada.admin@demo.crosstally.test'
};

beforeAll(async () => {
	for (const [role, email] of Object.entries(ROLE_USERS)) roleClients[role] = await signedIn(email);
});

describe('the access table covers the route tree', () => {
	it('finds the routes', () => {
		expect(routes.length).toBeGreaterThanOrEqual(10);
		expect(routes.map((r) => r.id)).toContain('/people');
	});
	it.each(routes.map((r) => [r.id]))('%s has an entry', (id) => {
		expect(ACCESS[id], `add ${id} to src/lib/server/access.ts`).toBeDefined();
	});
	it('lists no route that does not exist', () => {
		const ids = new Set(routes.map((r) => r.id));
		expect(
			Object.keys(ACCESS).filter((k) => !ids.has(k)),
			'stale entries in src/lib/server/access.ts'
		).toEqual([]);
	});
	it.each(routes.map((r) => [r.id]))('%s: every method it implements has a rule, and every rule a method', (id) => {
		const { methods } = routeMethods(id);
		const rules = ACCESS[id] ?? {};
		for (const m of methods) expect(ruleFor(id, m), `${m} ${id} has no rule`).toBeDefined();
		const listed = Object.keys(rules).filter((m) => m !== '*');
		expect(
			listed.filter((m) => !methods.includes(m as Method)),
			`${id}: rules for methods the route does not implement`
		).toEqual([]);
	});
});

/** Every method the table names (a `*` rule: all five) as anonymous and as each role. */
const walk: { id: string; method: Method; action?: string }[] = [];
for (const r of routes) {
	const rules = ACCESS[r.id] ?? {};
	const methods = rules['*'] ? ALL_METHODS : (Object.keys(rules) as Method[]);
	for (const method of methods) walk.push({ id: r.id, method });
	for (const action of routeMethods(r.id).actions) walk.push({ id: r.id, method: 'POST', action });
}
let checked = 0;

async function send(client: Client, path: string, method: Method): Promise<Response> {
	if (method === 'GET') return client.get(path);
	if (path.startsWith('/api/')) return client.request(path, { method, json: {} });
	// a browser's plain form post (with accept: */* SvelteKit would answer an action-JSON envelope)
	return client.request(path, { method, form: {}, headers: { accept: 'text/html' } });
}

describe('every method of every route answers anonymous and each role as the table says', () => {
	it.each(walk.map((w) => [`${w.method} ${w.id}${w.action ? `?/${w.action}` : ''}`, w]))('%s', async (_, w) => {
		const { id, method, action } = w as (typeof walk)[number];
		const path = samplePath(id) + (action ? `?/${action}` : '');
		// signing out would end the shared sessions; it is checked with throwaway clients below
		const skipRoles = id === '/signout';
		const anon = await send(new Client(), path, method);
		const expectAnon = decide(id, method, null);
		if (expectAnon === 'anonymous') {
			if (path.startsWith('/api/')) expect(anon.status, `anonymous ${method} ${path}`).toBe(401);
			else {
				expect(anon.status, `anonymous ${method} ${path}`).toBe(303);
				expect(anon.headers.get('location')).toMatch(/^\/signin\?redirectTo=/);
			}
		} else expect([401, 403], `anonymous ${method} ${path}`).not.toContain(anon.status);
		expect(anon.status, `anonymous ${method} ${path}`).toBeLessThan(500);
		expect(await anon.text()).not.toMatch(LEAK);
		checked++;
		if (skipRoles) return;

		for (const [role, client] of Object.entries(roleClients)) {
			const user = ACCOUNTS.find((a) => a.email === ROLE_USERS[role])!;
			const res = await send(client, path, method);
			const d = decide(id, method, user.roles);
			const body = await res.text();
			if (d === 'forbidden') expect(res.status, `${role} ${method} ${path}`).toBe(403);
			// a named action may narrow the route's rule (e.g. reopen: leads only), never widen it
			else if (!action) expect([401, 403], `${role} ${method} ${path} answered ${res.status}`).not.toContain(res.status);
			expect(res.status, `${role} ${method} ${path}: ${body.slice(0, 200)}`).toBeLessThan(500);
			expect(body, `${role} ${method} ${path}`).not.toMatch(LEAK);
			checked++;
		}
	});

	it('signing out works for each role, and the shared sessions survived the walk', async () => {
		for (const email of Object.values(ROLE_USERS)) {
			const c = await signedIn(email);
			expect((await c.get('/api/v1/me')).status).toBe(200);
			const out = await c.request('/signout', { method: 'POST', form: {} });
			expect(out.status).toBeLessThan(400);
			expect((await c.get('/api/v1/me')).status).toBe(401);
		}
		for (const client of Object.values(roleClients)) expect((await client.get('/api/v1/me')).status).toBe(200);
		console.log(`[access-walk] ${walk.length} route × method cases, ${checked} requests checked (anonymous + ${Object.keys(roleClients).length} roles)`);
	});
});
