/**
 * The session check without a database read per request (issue 18; src/lib/server/session.ts,
 * src/lib/server/user-cache.ts): the token is not re-issued on every request, the account's state
 * comes from Redis, and every change to the account still takes effect at the very next request —
 * also when the previous request has just put the account's state in the cache. Redis unreachable:
 * a signed-in request is refused with 503 (fail closed), never served as the user or as anonymous.
 */
import { describe, it, expect, afterAll } from 'vitest';
import { Client, signedIn, ACCOUNTS } from '../helpers/http';
import { startExtraApp } from '../helpers/services';
import { redis, closeRedis } from '../../src/lib/server/redis';
import { closeDb, selectOne } from '../../src/lib/server/db';
import { createUser, setRoles, getUserByEmail, endAllSessions } from '../../src/lib/server/users';

afterAll(async () => {
	await closeRedis();
	await closeDb();
});

const PASSWORD = 'a-long-password-123';
const newAccount = async (tag: string) => {
	const email = `${tag}-${Date.now()}-${Math.random().toString(36).slice(2, 6)}@clinic.test`;
	const id = await createUser({ email, name: `Probe ${tag}`, roles: ['scorer'], password: PASSWORD }, null);
	const c = new Client();
	expect(await c.signIn(email, PASSWORD)).toBe(true);
	return { id, email, c };
};
const me = (c: Client) => c.get('/api/v1/me');
const sessionCookies = (c: Client) => c.lastSetCookies.filter((x) => x.includes('session-token'));

describe('the session check (issue 18)', () => {
	it('a token verified moments ago is used as it is: no new session cookie on the next requests', async () => {
		const { c } = await newAccount('quiet');
		const before = new Map(c.cookies);
		for (let i = 0; i < 3; i++) {
			expect((await me(c)).status).toBe(200);
			expect(sessionCookies(c), 'no re-issue within the refresh interval (min(60 s, idle/10) = 60 s at 30 min idle)').toEqual([]);
		}
		expect(c.cookies).toEqual(before);
	});

	it('the account state is cached in Redis under the account generation, not read from the database each time', async () => {
		const { id, c } = await newAccount('cached');
		expect((await me(c)).status).toBe(200);
		const raw = await redis().get(`ct:user:state:${id}`);
		expect(raw, 'the first request stored the state').not.toBeNull();
		const entry = JSON.parse(raw!);
		const gen = await redis().get(`ct:user:gen:${id}`);
		expect(entry.g).toBe(gen ?? '0');
		expect(entry).toMatchObject({ id, active: true, roles: ['scorer'] });
		// the entry lives 120 s (STATE_TTL): the bound on a stale entry if a post-commit invalidation is lost
		const ttl = await redis().ttl(`ct:user:state:${id}`);
		expect(ttl).toBeGreaterThan(100);
		expect(ttl).toBeLessThanOrEqual(120);
	});

	it('deactivation takes effect at the very next request, with the state cached by the request before', async () => {
		const { id, c } = await newAccount('leaver');
		expect((await me(c)).status).toBe(200);
		expect((await me(c)).status).toBe(200); // served from the cache
		const admin = await signedIn('admin');
		const r = await admin.action('/people?/active', { id: String(id), active: '0' });
		expect(r.body.type).toBe('success');
		expect((await me(c)).status).toBe(401);
		const page = await c.get('/protocols');
		expect(page.status).toBe(303);
		expect(page.headers.get('location')).toBe('/signin?redirectTo=%2Fprotocols');
		// and reactivation does not revive the old session (its session version is behind)
		expect((await admin.action('/people?/active', { id: String(id), active: '1' })).body.type).toBe('success');
		expect((await me(c)).status).toBe(401);
	});

	it('sign-out takes effect at the very next request of a cookie saved before it', async () => {
		const { c } = await newAccount('out');
		expect((await me(c)).status).toBe(200);
		const saved = new Map(c.cookies);
		const out = await c.request('/signout', { method: 'POST', form: {}, headers: { accept: 'text/html' } });
		expect([302, 303]).toContain(out.status);
		const replay = new Client();
		replay.cookies = saved;
		expect((await replay.get('/api/v1/me')).status).toBe(401);
	});

	it('"end all sessions" and a role change take effect at the very next request', async () => {
		const a = await newAccount('roles');
		expect(await (await me(a.c)).json()).toMatchObject({ roles: ['scorer'] });
		expect((await a.c.get('/catalog')).status, 'a scorer may not open the catalog').toBe(403);
		const admin = await getUserByEmail(ACCOUNTS.admin);
		await setRoles(a.id, ['scorer', 'lead'], admin!.id);
		const now = await me(a.c);
		expect(now.status).toBe(200);
		expect((await now.json()).roles).toEqual(['scorer', 'lead']);
		expect((await a.c.get('/catalog')).status, 'the lead screen opens at once').toBe(200);

		const b = await newAccount('ended');
		expect((await me(b.c)).status).toBe(200);
		await endAllSessions(b.id);
		expect((await me(b.c)).status).toBe(401);
		const row = await selectOne<{ session_version: number }>('SELECT session_version FROM users WHERE id = :id', { id: b.id });
		expect(row?.session_version).toBe(2); // 1 at creation, + 1
	});

	it('Redis unreachable: a signed-in request is refused with 503, neither served nor treated as anonymous', async () => {
		const port = Number(process.env.PORT ?? 3010) + 100;
		const app = await startExtraApp(port, { ORIGIN: `http://localhost:${port}`, REDIS_URL: 'redis://127.0.0.1:1' });
		try {
			const c = await signedIn('scorer');
			const there = new Client(`http://localhost:${port}`);
			there.cookies = new Map(c.cookies);
			const api = await there.get('/api/v1/me');
			expect(api.status).toBe(503);
			expect((await api.json()).code).toBe('unavailable');
			const page = await there.get('/protocols');
			expect(page.status).toBe(503);
			expect(await page.text()).toContain('Your session cannot be checked right now');
			// the cookie is kept: the session is not ended by an outage
			expect(sessionCookies(there)).toEqual([]);
		} finally {
			await app.stop();
		}
	}, 60_000);
});
