/**
 * The sign-in throttle's rules (src/lib/server/throttle.ts) on ioredis-mock, which runs the Lua
 * scripts. The atomicity under parallel guesses and the whole path through the sign-in form are
 * tested against the real Redis in tests/integration/sign-in-security.test.ts.
 */
import { describe, it, expect } from 'vitest';
import RedisMock from 'ioredis-mock';
import type { Redis } from 'ioredis';
import { createThrottle } from '../../src/lib/server/throttle';

const limits = { maxPerPair: 3, maxPerAccount: 6, maxPerAddress: 5, windowSeconds: 60, knownSeconds: 3600 };
const mk = (prefix: string) => {
	const client = new RedisMock() as unknown as Redis;
	return { client, t: createThrottle(client, limits, prefix) };
};
/** n wrong guesses: each is a reservation the password check then does not give back. */
const fail = async (t: ReturnType<typeof mk>['t'], email: string, address: string, n: number) => {
	for (let i = 0; i < n; i++) expect((await t.reserve(email, address)).ok).toBe(true);
};

describe('sign-in throttle (ioredis-mock)', () => {
	it('blocks an account at one address after the limit, not before, and not at other addresses', async () => {
		const { t } = mk('u1');
		await fail(t, 'a@x.test', '10.0.0.1', 3);
		expect(await t.reserve('a@x.test', '10.0.0.1')).toEqual({ ok: false, limit: 'pair' });
		expect(await t.reserve('A@X.test', '10.0.0.1')).toEqual({ ok: false, limit: 'pair' }); // e-mail case-insensitive
		expect((await t.reserve('a@x.test', '10.0.0.9')).ok).toBe(true); // the real user elsewhere
	});

	it('a ceiling per account over all addresses, which does not apply where the account signed in before', async () => {
		const { t } = mk('u2');
		expect((await t.reserve('b@x.test', '10.9.9.9')).ok).toBe(true);
		await t.succeeded('b@x.test', '10.9.9.9', false); // the real user's usual address
		for (let i = 0; i < 3; i++) await fail(t, 'b@x.test', `10.0.1.${i}`, 2); // 6 failures from 3 addresses
		expect(await t.reserve('b@x.test', '10.0.1.7')).toEqual({ ok: false, limit: 'account' });
		expect(await t.reserve('b@x.test', '10.9.9.9')).toEqual({ ok: true, known: true });
	});

	it('an address spraying many accounts is blocked for new accounts, not for those known there', async () => {
		const { t } = mk('u3');
		expect((await t.reserve('known@x.test', '10.0.0.2')).ok).toBe(true);
		await t.succeeded('known@x.test', '10.0.0.2', false);
		for (let i = 0; i < 5; i++) await fail(t, `user${i}@x.test`, '10.0.0.2', 1);
		expect(await t.reserve('fresh@x.test', '10.0.0.2')).toEqual({ ok: false, limit: 'address' });
		expect((await t.reserve('fresh@x.test', '10.0.0.3')).ok).toBe(true);
		expect(await t.reserve('known@x.test', '10.0.0.2')).toEqual({ ok: true, known: true });
	});

	it('counters expire with the window', async () => {
		const { t, client } = mk('u4');
		await fail(t, 'c@x.test', '10.0.0.4', 1);
		const [pair, acct, addr] = await t.keys('c@x.test', '10.0.0.4');
		for (const k of [pair, acct, addr]) {
			const ttl = await client.ttl(k);
			expect(ttl).toBeGreaterThan(0);
			expect(ttl).toBeLessThanOrEqual(60);
		}
	});

	it('a right password clears the pair and gives back its reservation; a reset lifts every block', async () => {
		const { t, client } = mk('u5');
		await fail(t, 'd@x.test', '10.0.1.1', 2);
		const v = await t.reserve('d@x.test', '10.0.1.1');
		expect(v.ok).toBe(true);
		await t.succeeded('d@x.test', '10.0.1.1', false);
		const [pair, acct] = await t.keys('d@x.test', '10.0.1.1');
		expect(await client.get(pair)).toBeNull();
		expect(await client.get(acct)).toBe('2'); // the two real failures stay on the ceiling
		await fail(t, 'd@x.test', '10.0.2.2', 3);
		expect((await t.reserve('d@x.test', '10.0.2.2')).ok).toBe(false);
		await t.liftAccount('d@x.test');
		expect((await t.reserve('d@x.test', '10.0.2.2')).ok).toBe(true);
	});

	it('an attempt whose password could not be checked does not count', async () => {
		const { t, client } = mk('u6');
		const v = await t.reserve('e@x.test', '10.0.3.3');
		expect(v.ok).toBe(true);
		await t.release('e@x.test', '10.0.3.3', false);
		const [pair, acct, addr] = await t.keys('e@x.test', '10.0.3.3');
		expect([await client.get(pair), await client.get(acct), await client.get(addr)]).toEqual(['0', '0', '0']);
	});
});
