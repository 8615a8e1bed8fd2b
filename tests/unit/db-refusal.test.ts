/**
 * A request that fails because the database is down, or because every pooled connection stayed
 * busy past the acquire timeout (overload), answers 503 with a message saying which, and a
 * Retry-After (RFC 9110 §10.2.3) that fits: seconds for an overload, a minute for an outage.
 */
import { describe, expect, it } from 'vitest';
import { ConnectionAcquireTimeoutError, ConnectionRefusedError } from 'sequelize';
import { apiError } from '../../src/lib/server/http';

describe('503 answers for the database', () => {
	it('an exhausted pool says busy, nothing saved, retry in seconds', async () => {
		const res = apiError(new ConnectionAcquireTimeoutError(new Error('Operation timeout')));
		expect(res.status).toBe(503);
		expect(res.headers.get('Retry-After')).toBe('5');
		const body = await res.json();
		expect(body.code).toBe('busy');
		expect(body.message).toBe('Crosstally is too busy to take this request right now. Nothing was saved; try again in a few seconds.');
	});

	it('a refused connection says the database cannot be reached, retry in a minute', async () => {
		const res = apiError(new ConnectionRefusedError(Object.assign(new Error('connect ECONNREFUSED'), { code: 'ECONNREFUSED' })));
		expect(res.status).toBe(503);
		expect(res.headers.get('Retry-After')).toBe('60');
		const body = await res.json();
		expect(body.code).toBe('unavailable');
		expect(body.message).toBe('The database cannot be reached right now. Nothing was saved; try again in a minute.');
	});

	it('anything else is not turned into a 503', () => {
		expect(() => apiError(new Error('a bug'))).toThrow('a bug');
	});
});
