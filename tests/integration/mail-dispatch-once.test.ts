/**
 * Two dispatchers at once (two workers woken by the same commit, as in the cluster) hand each outbox
 * row to the queue once. Each dispatch of a row adds 1 to its `attempts` (outbox.ts markDispatched),
 * so a row dispatched twice shows attempts = 2. Before the dispatch lock (mail/queue.ts), both read
 * the same unmarked rows and most rows went to the queue twice.
 */
import { afterAll, describe, expect, it } from 'vitest';
import { Queue } from 'bullmq';
import { exec, select } from '../../src/lib/server/db';
import { bullConnection } from '../../src/lib/server/redis';
import { MAIL_QUEUE, dispatchOutbox, jobIdOf } from '../../src/lib/server/mail/queue';

const run = `${Date.now()}-${process.pid}`;
const N = 60;
const keys = Array.from({ length: N }, (_, i) => `invite:dispatch-once-${run}-${i}`);

afterAll(async () => {
	const queue = new Queue(MAIL_QUEUE, { connection: bullConnection() });
	try {
		for (const k of keys) await queue.remove(jobIdOf(k));
	} finally {
		await queue.close();
	}
	await exec('DELETE FROM outbox WHERE idempotency_key IN (:keys)', { keys });
});

describe('the outbox dispatcher', () => {
	it('run twice at once, hands each of 60 rows to the queue once (attempts = 1 on every row)', async () => {
		// due in a day: each a delayed job of its own in the queue, nothing is sent during the test
		const notBefore = Date.now() + 86_400_000;
		await exec('INSERT INTO outbox (kind, idempotency_key, payload) VALUES :rows', {
			rows: keys.map((k) => ['invite', k, JSON.stringify({ userId: 0, notBefore })])
		});
		const pending = async () =>
			Number((await select<{ n: number }>('SELECT COUNT(*) AS n FROM outbox WHERE idempotency_key IN (:keys) AND dispatched_at IS NULL', { keys }))[0].n);
		for (let round = 0; round < 10 && (await pending()) > 0; round++) await Promise.all([dispatchOutbox(), dispatchOutbox()]);
		expect(await pending()).toBe(0);
		const rows = await select<{ idempotency_key: string; attempts: number }>('SELECT idempotency_key, attempts FROM outbox WHERE idempotency_key IN (:keys)', {
			keys
		});
		expect(rows).toHaveLength(N);
		expect(rows.filter((r) => Number(r.attempts) !== 1).map((r) => `${r.idempotency_key}: ${r.attempts}`)).toEqual([]);
	});
});
