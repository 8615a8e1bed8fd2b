import { describe, it, expect } from 'vitest';
import RedisMock from 'ioredis-mock';
import type { Redis } from 'ioredis';
import { createThrottle } from '../../src/lib/server/throttle';

const limits = { maxPerAccount: 3, maxPerAddress: 5, windowSeconds: 60 };

describe('sign-in throttle (ioredis-mock)', () => {
	it('blocks an account after the limit of failures, not before', async () => {
		const t = createThrottle(new RedisMock() as unknown as Redis, limits, 'u1');
		for (let i = 0; i < 2; i++) await t.recordFailure('a@x.test', '10.0.0.1');
		expect(await t.isBlocked('a@x.test', '10.0.0.9')).toBe(false);
		await t.recordFailure('a@x.test', '10.0.0.1');
		expect(await t.isBlocked('a@x.test', '10.0.0.9')).toBe(true);
		// e-mail is case-insensitive
		expect(await t.isBlocked('A@X.test', '10.0.0.9')).toBe(true);
		// another account from another address is not affected
		expect(await t.isBlocked('b@x.test', '10.0.0.9')).toBe(false);
	});

	it('blocks an address that tries many accounts', async () => {
		const t = createThrottle(new RedisMock() as unknown as Redis, limits, 'u2');
		for (let i = 0; i < 5; i++) await t.recordFailure(`user${i}@x.test`, '10.0.0.2');
		expect(await t.isBlocked('fresh@x.test', '10.0.0.2')).toBe(true);
		expect(await t.isBlocked('fresh@x.test', '10.0.0.3')).toBe(false);
	});

	it('sets an expiry on the counters so the block ends', async () => {
		const client = new RedisMock() as unknown as Redis;
		const t = createThrottle(client, limits, 'u3');
		await t.recordFailure('c@x.test', '10.0.0.4');
		const ttl = await client.ttl('u3:acct:c@x.test');
		expect(ttl).toBeGreaterThan(0);
		expect(ttl).toBeLessThanOrEqual(60);
	});

	it('a successful sign-in resets the account counter', async () => {
		const t = createThrottle(new RedisMock() as unknown as Redis, limits, 'u4');
		for (let i = 0; i < 3; i++) await t.recordFailure('d@x.test', `10.0.1.${i}`);
		expect(await t.isBlocked('d@x.test', '10.0.2.1')).toBe(true);
		await t.reset('d@x.test');
		expect(await t.isBlocked('d@x.test', '10.0.2.1')).toBe(false);
	});
});
