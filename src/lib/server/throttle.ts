/**
 * Throttling of failed sign-ins with Redis counters: per account (e-mail) and per client address,
 * each in a fixed window. Works with any client that has incr/expire/get/del (ioredis, ioredis-mock).
 */
import type { Redis } from 'ioredis';
import { config } from './config';
import { redis } from './redis';

export interface ThrottleLimits {
	maxPerAccount: number;
	maxPerAddress: number;
	windowSeconds: number;
}

type Client = Pick<Redis, 'incr' | 'expire' | 'get' | 'del' | 'multi'>;

export function createThrottle(client: Client, limits: ThrottleLimits, prefix = 'ct:signin') {
	const accountKey = (email: string) => `${prefix}:acct:${email.toLowerCase()}`;
	const addressKey = (addr: string) => `${prefix}:addr:${addr}`;
	return {
		async isBlocked(email: string, address: string): Promise<boolean> {
			const [a, b] = await Promise.all([client.get(accountKey(email)), client.get(addressKey(address))]);
			return Number(a ?? 0) >= limits.maxPerAccount || Number(b ?? 0) >= limits.maxPerAddress;
		},
		async recordFailure(email: string, address: string): Promise<void> {
			await client
				.multi()
				.incr(accountKey(email))
				.expire(accountKey(email), limits.windowSeconds, 'NX')
				.incr(addressKey(address))
				.expire(addressKey(address), limits.windowSeconds, 'NX')
				.exec();
		},
		async reset(email: string): Promise<void> {
			await client.del(accountKey(email));
		}
	};
}

export function signInThrottle() {
	return createThrottle(redis(), config.signIn);
}
