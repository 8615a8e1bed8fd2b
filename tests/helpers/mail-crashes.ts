/**
 * Shared setup of the tests that stop, kill and restart the mail worker and Redis by PID
 * (mail-recovery.test.ts, mail-batches.test.ts; mail-wake.test.ts takes the hooks and sleep): a worker
 * that sweeps fast, the hooks that put a plain worker and the services back after every test, and an
 * invitation whose outbox row a test follows.
 */
import { afterAll, afterEach, expect } from 'vitest';
import { signedIn, waitFor } from './http';
import { refuseNext } from './review-fixtures';
import { restoreServices, stopWorker } from './services';
import { selectOne, closeDb } from '../../src/lib/server/db';
import { closeRedis } from '../../src/lib/server/redis';

export const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));

/** A worker that sweeps every second, with a 2 s grace and a 3 s lease (production: 30 s, 60 s, 10 min). */
export const FAST_SWEEP = { MAIL_SWEEP_MS: '1000', MAIL_SWEEP_GRACE_MS: '2000', MAIL_CLAIM_LEASE_MS: '3000' };

/** After every test of the file: no SMTP refusal left, the worker stopped, the services as npm test started them. */
export function restoreMailServicesAfterEach(): void {
	afterEach(async () => {
		await refuseNext(0);
		await stopWorker();
		await restoreServices();
	}, 150_000);
	afterAll(async () => {
		await closeRedis();
		await closeDb();
	});
}

/** An admin invites a new scorer: its address, the outbox row's idempotency key, and the BullMQ job id of a single message. */
export async function invite(tag: string): Promise<{ email: string; key: string; jobId: string }> {
	const email = `${tag}-${Date.now()}@clinic.test`;
	const admin = await signedIn('admin');
	const r = await admin.action('/people?/invite', { name: `Mail ${tag}`, email, roles: ['scorer'] });
	expect(r.body.type).toBe('success');
	const row = await waitFor(() =>
		selectOne<{ idempotency_key: string }>(
			`SELECT o.idempotency_key FROM outbox o JOIN users u ON u.id = JSON_VALUE(o.payload, '$.userId') WHERE u.email = :email`,
			{ email }
		)
	);
	return { email, key: row.idempotency_key, jobId: row.idempotency_key.replace(/:/g, '_') };
}
