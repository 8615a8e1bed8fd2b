/** Redis connections: one shared client for plain commands, and factories for BullMQ. */
import { Redis, type RedisOptions } from 'ioredis';
import { config } from './config';

let shared: Redis | null = null;

export function redis(): Redis {
	if (!shared) {
		shared = new Redis(config.redisUrl, {
			maxRetriesPerRequest: 1,
			connectTimeout: 2_000,
			commandTimeout: 2_000
		});
		shared.on('error', () => undefined); // reported where used; avoid unhandled error events
	}
	return shared;
}

/** A connection for BullMQ (it needs maxRetriesPerRequest: null). */
export function bullConnection(extra: RedisOptions = {}): Redis {
	const c = new Redis(config.redisUrl, { maxRetriesPerRequest: null, ...extra });
	c.on('error', () => undefined);
	return c;
}

export async function closeRedis(): Promise<void> {
	if (shared) {
		const s = shared;
		shared = null;
		s.disconnect();
	}
}
