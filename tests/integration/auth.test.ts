/** Sign-in, roles, throttling, deactivation and invitations against the running app. */
import { describe, it, expect, afterAll } from 'vitest';
import { Client, signedIn, caughtMail, waitFor, ACCOUNTS } from '../helpers/http';
import { redis, closeRedis } from '../../src/lib/server/redis';
import { closeDb, exec, selectOne } from '../../src/lib/server/db';
import { createUser } from '../../src/lib/server/users';

afterAll(async () => {
	await closeRedis();
	await closeDb();
});

const me = async (c: Client) => {
	const r = await c.get('/api/v1/me');
	return { status: r.status, body: r.status === 200 ? await r.json() : null };
};

describe('sign-in', () => {
	it('each demo account signs in and carries its roles', async () => {
		const expected: Record<string, string[]> = { scorer: ['scorer'], reviewer: ['reviewer'], lead: ['lead', 'reviewer'], admin: ['admin'] };
		for (const [who, roles] of Object.entries(expected)) {
			const c = await signedIn(who);
			const m = await me(c);
			expect(m.status).toBe(200);
			expect(m.body.email).toBe(ACCOUNTS[who as keyof typeof ACCOUNTS]);
			expect(m.body.roles.sort()).toEqual([...roles].sort());
		}
	});

	it('a wrong password is refused with a clear message and no session', async () => {
		const c = new Client();
		const r = await c.action('/signin', { providerId: 'credentials', email: ACCOUNTS.scorer3, password: 'wrong-password', redirectTo: '/' });
		expect(r.body.type).toBe('failure');
		expect(r.body.status).toBe(400);
		expect(r.body.data).toContain('do not match an active account');
		expect((await me(c)).status).toBe(401);
	});

	it('the session cookie is HttpOnly and SameSite', async () => {
		const c = new Client();
		const res = await c.request('/signin', {
			method: 'POST',
			form: { providerId: 'credentials', email: ACCOUNTS.admin, password: 'crosstally-demo', redirectTo: '/' },
			headers: { 'x-sveltekit-action': 'true' }
		});
		const cookie = res.headers.getSetCookie().find((s) => s.startsWith('authjs.session-token='));
		expect(cookie).toBeDefined();
		expect(cookie).toMatch(/HttpOnly/i);
		expect(cookie).toMatch(/SameSite=Lax/i);
	});

	it('anonymous requests: pages go to sign-in, API routes answer 401 JSON', async () => {
		const c = new Client();
		const page = await c.get('/people');
		expect(page.status).toBe(303);
		expect(page.headers.get('location')).toBe('/signin?redirectTo=%2Fpeople');
		const api = await c.get('/api/v1/me');
		expect(api.status).toBe(401);
		expect((await api.json()).message).toBe('Sign in first.');
	});

	it('a form post from another origin is refused (SvelteKit origin check)', async () => {
		const res = await fetch(new URL('/signin', process.env.ORIGIN), {
			method: 'POST',
			headers: { 'content-type': 'application/x-www-form-urlencoded', origin: 'http://evil.example' },
			body: 'providerId=credentials&email=a%40b.c&password=x',
			redirect: 'manual'
		});
		expect(res.status).toBe(403);
	});
});

describe('throttling of failed sign-ins (real Redis)', () => {
	it('blocks the account after 5 failures, even with the right password, until the window ends', async () => {
		const email = `throttle-${Date.now()}@clinic.test`;
		await createUser({ email, name: 'Throttle Probe', roles: ['scorer'], password: 'the-right-password-1' }, null);
		const c = new Client();
		for (let i = 0; i < 5; i++) {
			const r = await c.action('/signin', { providerId: 'credentials', email, password: `wrong-${i}`, redirectTo: '/' });
			expect(r.body.status).toBe(400);
		}
		const blocked = await c.action('/signin', { providerId: 'credentials', email, password: 'the-right-password-1', redirectTo: '/' });
		expect(blocked.body.status).toBe(429);
		expect(blocked.body.data).toContain('Too many failed sign-ins');
		// counted per account and address (tests/integration/sign-in-security.test.ts covers the rest)
		const pairs = await redis().keys(`ct:signin:pair:*:${email}:*`);
		expect(pairs).toHaveLength(1);
		expect(Number(await redis().get(pairs[0]))).toBe(5);
		// the window ending is Redis expiring the counter
		await redis().del(pairs[0]);
		expect(await c.signIn(email, 'the-right-password-1')).toBe(true);
	});
});

describe('deactivation', () => {
	it('ends an existing session at its next request', async () => {
		const email = `leaver-${Date.now()}@clinic.test`;
		const id = await createUser({ email, name: 'Leaver', roles: ['scorer'], password: 'a-long-password-123' }, null);
		const user = new Client();
		expect(await user.signIn(email, 'a-long-password-123')).toBe(true);
		expect((await me(user)).status).toBe(200);
		const admin = await signedIn('admin');
		const r = await admin.action('/people?/active', { id: String(id), active: '0' });
		expect(r.body.type).toBe('success');
		expect((await me(user)).status).toBe(401);
		const again = await user.action('/signin', { providerId: 'credentials', email, password: 'a-long-password-123', redirectTo: '/' });
		expect(again.body.type).toBe('failure');
	});
});

describe('invitation by e-mail', () => {
	it('sends a one-time set-password link through the queue to the mail fake', async () => {
		const email = `new-${Date.now()}@clinic.test`;
		const admin = await signedIn('admin');
		const bad = await admin.action('/people?/invite', { name: 'N', email: 'not-an-address', roles: [] });
		expect(bad.body.type).toBe('failure');
		expect(bad.body.data).toContain('Enter a valid e-mail address');
		const r = await admin.action('/people?/invite', { name: 'Noor Haddad', email, roles: ['scorer', 'reviewer'] });
		expect(r.body.type).toBe('success');
		const [mail] = await waitFor(async () => {
			const m = await caughtMail(email);
			return m.length ? m : null;
		});
		expect(mail.subject).toBe('You are invited to Crosstally');
		expect(mail.html).toContain('Set your password');
		const link = mail.text.match(/https?:\/\/\S+\/set-password\/[\w-]+/)?.[0];
		expect(link).toBeDefined();
		const path = new URL(link!).pathname;
		const anon = new Client();
		const short = await anon.action(path, { password: 'short', confirm: 'short' });
		expect(short.body.data).toContain('Use at least 12 characters');
		const ok = await anon.action(path, { password: 'a sentence of my own', confirm: 'a sentence of my own' });
		expect(ok.body.type).toBe('redirect');
		const reused = await anon.action(path, { password: 'a sentence of my own', confirm: 'a sentence of my own' });
		expect(reused.body.data).toContain('already been used');
		expect(await anon.signIn(email, 'a sentence of my own')).toBe(true);
		expect((await me(anon)).body.roles.sort()).toEqual(['reviewer', 'scorer']);
		const row = await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM mail_log WHERE kind = 'invite' AND recipients = :email AND status = 'sent'`, {
			email
		});
		expect(row?.n).toBe(1);
	});

	it('an expired link is refused with a message', async () => {
		const email = `late-${Date.now()}@clinic.test`;
		const admin = await signedIn('admin');
		await admin.action('/people?/invite', { name: 'Late Comer', email, roles: ['scorer'] });
		const [mail] = await waitFor(async () => {
			const m = await caughtMail(email);
			return m.length ? m : null;
		});
		const path = new URL(mail.text.match(/https?:\/\/\S+\/set-password\/[\w-]+/)![0]).pathname;
		await exec(`UPDATE user_tokens ut JOIN users u ON u.id = ut.user_id SET ut.expires_at = UTC_TIMESTAMP(3) - INTERVAL 1 HOUR WHERE u.email = :email`, {
			email
		});
		const page = await new Client().get(path);
		expect(page.status).toBe(200);
		expect(await page.text()).toContain('This link has expired');
	});
});
