/**
 * Reviewer notifications under faults, against the real services npm test starts: Redis stopped
 * during a submission, the worker killed by its PID between the SMTP accept and the mail_log
 * update, the SMTP server refusing. Each test puts Redis and a plain worker back at the end.
 */
import { afterAll, afterEach, beforeAll, beforeEach, describe, expect, it } from 'vitest';
import { Queue } from 'bullmq';
import { exec, selectOne } from '../../src/lib/server/db';
import { bullConnection } from '../../src/lib/server/redis';
import { MAIL_QUEUE } from '../../src/lib/server/mail/queue';
import { listProtocolMail } from '../../src/lib/server/mail/reminders/history';
import { recoverLostReviewMail } from '../../src/lib/server/mail/reminders/scheduling';
import { saveReviewMailSettings, REVIEW_MAIL_SETTING } from '../../src/lib/server/mail/reminders/settings';
import { config } from '../../src/lib/server/config';
import { ACCOUNTS, waitFor } from '../helpers/http';
import {
	caughtFor,
	cleanupFixtures,
	endAllChains,
	keyOf,
	mailLogRows,
	outboxRows,
	protocolReachesReview,
	refuseNext,
	type FakeMessage
} from '../helpers/review-fixtures';
import { killWorker, restoreServices, startRedis, startWorker, stopRedis, stopWorker, workerPid } from '../helpers/services';

/** The suite's reminder interval is a day; these tests save a reminder every 3 s (0.05 min × 60 000 ms). */
const INTERVAL_MINUTES = 0.05;
const INTERVAL_MS = 3_000;
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
const firstKey = (protocolId: number, reviewerId: number) => `review:${protocolId}:r1:u${reviewerId}:0`;
const byKey = (msgs: FakeMessage[], key: string) => msgs.filter((m) => keyOf(m) === key);

beforeAll(async () => {
	await restoreServices();
});

beforeEach(async () => {
	await saveReviewMailSettings({ reminderIntervalMinutes: INTERVAL_MINUTES, escalateAfterReminders: config.escalateAfterReminders });
});

afterEach(async () => {
	await refuseNext(0);
	await restoreServices();
	await endAllChains();
	await exec(`DELETE FROM settings WHERE name = :n`, { n: REVIEW_MAIL_SETTING });
}, 60_000);

afterAll(async () => {
	await cleanupFixtures();
});

describe('review notifications under faults', () => {
	it('Redis stopped during a submission: the submission succeeds, the outbox row waits, the e-mail goes out once Redis is back', async () => {
		await stopRedis();
		const f = await protocolReachesReview(); // the reconciliation transaction commits without Redis
		const key = firstKey(f.protocolId, f.reviewerId);
		await sleep(2_500);
		const [row] = await outboxRows(f.protocolId);
		expect(row.idempotency_key).toBe(key);
		expect(row.dispatched_at, 'not dispatched while Redis is down').toBeNull();
		expect(await caughtFor(f)).toEqual([]);

		await startRedis();
		const m = await waitFor(async () => byKey(await caughtFor(f), key)[0], 30_000);
		expect(m.envelope.to).toEqual([ACCOUNTS.reviewer]);
		await sleep(2_000);
		expect(byKey(await caughtFor(f), key)).toHaveLength(1);
		const log = await mailLogRows(f.protocolId);
		expect(log.filter((r) => r.idempotency_key === key).map((r) => r.status)).toEqual(['sent']);
	}, 60_000);

	it('the worker killed by its PID after the SMTP accept and restarted: the e-mail is delivered exactly once', async () => {
		await stopWorker();
		await startWorker({ MAIL_TEST_PAUSE_AFTER_SEND_MS: '20000' });
		const f = await protocolReachesReview();
		const key = firstKey(f.protocolId, f.reviewerId);
		// the fake has the message: the worker is now pausing before it records 'sent'
		await waitFor(async () => byKey(await caughtFor(f), key)[0], 20_000, 50);
		expect(workerPid()).not.toBeNull();
		await killWorker();
		expect(workerPid()).toBeNull();
		const claim = await selectOne<{ status: string }>('SELECT status FROM mail_log WHERE idempotency_key = :key', { key });
		expect(claim?.status, 'killed between the SMTP accept and the log update').toBe('sending');

		await startWorker();
		// the job's lock expires and the restarted worker runs it again: it must not send again
		const queue = new Queue(MAIL_QUEUE, { connection: bullConnection() });
		try {
			const jobId = key.replace(/:/g, '_');
			await waitFor(async () => (await (await queue.getJob(jobId))?.isCompleted()) ?? false, 75_000, 500);
			const job = await queue.getJob(jobId);
			expect(job?.returnvalue).toBe('uncertain');
		} finally {
			await queue.close();
		}
		await sleep(1_000);
		expect(byKey(await caughtFor(f), key)).toHaveLength(1);
		// the chain goes on: the next reminder is scheduled and sent
		await waitFor(async () => byKey(await caughtFor(f), key.replace(/:0$/, ':1'))[0], 20_000);
		const entry = (await listProtocolMail(f.protocolId))[0];
		expect(entry.label).toBe('First e-mail');
		expect(['sending', 'uncertain']).toContain(entry.status);
	}, 120_000);

	it('the SMTP server refusing twice, then accepting: delivered once, after retries with backoff', async () => {
		await refuseNext(2);
		const started = Date.now();
		const f = await protocolReachesReview();
		const key = firstKey(f.protocolId, f.reviewerId);
		const m = await waitFor(async () => byKey(await caughtFor(f), key)[0], 45_000);
		// two refusals: backoff of MAIL_BACKOFF_MS (2 s) then twice that before the third attempt
		expect(Date.parse(m.receivedAt) - started).toBeGreaterThanOrEqual(5_000);
		await sleep(2_000);
		expect(byKey(await caughtFor(f), key)).toHaveLength(1);
		const log = await mailLogRows(f.protocolId);
		expect(log.filter((r) => r.idempotency_key === key).map((r) => r.status)).toEqual(['sent']);
	}, 60_000);

	it('a reminder whose delayed job was lost with a Redis restart is handed back to the queue and sent once', async () => {
		const f = await protocolReachesReview();
		const key = firstKey(f.protocolId, f.reviewerId);
		const k1 = key.replace(/:0$/, ':1');
		await waitFor(async () => byKey(await caughtFor(f), key)[0], 20_000);
		// reminder 1 is a delayed job in Redis now
		await waitFor(async () => (await outboxRows(f.protocolId)).find((r) => r.idempotency_key === k1 && r.dispatched_at !== null), 10_000, 100);
		await stopRedis(); // Redis keeps nothing across a restart (--save '', no AOF): the delayed job is gone
		await startRedis();
		await sleep(INTERVAL_MS + 2_000);
		expect(byKey(await caughtFor(f), k1), 'lost with the restart').toEqual([]);
		// the worker runs this every 30 s for rows a minute overdue; here without the grace period
		expect(await recoverLostReviewMail(0)).toBeGreaterThanOrEqual(1);
		await waitFor(async () => byKey(await caughtFor(f), k1)[0], 20_000);
		await sleep(1_500);
		expect(byKey(await caughtFor(f), k1)).toHaveLength(1);
	}, 60_000);

	it('review mail given up as nothing to send is marked so; 520 such rows older than a lost reminder no longer hide it from the sweep', async () => {
		// 520 reminders of a review that has ended, older than the live one below: protocol 0 never exists
		// (ids start at 1), so every check finds the review ended. The sweep reads 500 rows a round, oldest first.
		const DEAD = 520;
		await exec(`DELETE FROM outbox WHERE idempotency_key LIKE 'review:0:%'`);
		await exec(`INSERT INTO outbox (kind, idempotency_key, payload, dispatched_at, attempts) VALUES :rows`, {
			rows: Array.from({ length: DEAD }, (_, i) => {
				const chain = `review:0:r1:u0.${i + 2}`;
				return [
					'review_reminder',
					`${chain}:1`,
					JSON.stringify({ protocolId: 0, round: 1, reviewerId: 0, chain, reminderNo: 1 }),
					new Date(Date.now() - 3_600_000),
					1
				];
			})
		});
		const queue = new Queue(MAIL_QUEUE, { connection: bullConnection() });
		try {
			const f = await protocolReachesReview();
			const key = firstKey(f.protocolId, f.reviewerId);
			const k1 = key.replace(/:0$/, ':1');
			const k2 = key.replace(/:0$/, ':2');
			await waitFor(async () => byKey(await caughtFor(f), key)[0], 20_000);
			await waitFor(async () => (await outboxRows(f.protocolId)).find((r) => r.idempotency_key === k1 && r.dispatched_at !== null), 10_000, 100);
			// reminder 1's delayed job is lost (as with a Redis restart, see above), and its time passes
			expect(await queue.remove(k1.replace(/:/g, '_'))).toBe(1);
			await sleep(INTERVAL_MS + 1_000);
			expect(byKey(await caughtFor(f), k1), 'lost').toEqual([]);
			// before: each round read the same 500 ended rows and handed back none, for ever. Now the first round
			// marks those it reads as ended, and the second reaches the lost reminder.
			let handedBack = 0;
			for (let round = 0; round < 3 && handedBack === 0; round++) handedBack += await recoverLostReviewMail(0);
			expect(handedBack).toBeGreaterThanOrEqual(1);
			await waitFor(async () => byKey(await caughtFor(f), k1)[0], 20_000);
			const ended = await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM outbox WHERE idempotency_key LIKE 'review:0:%' AND skipped_at IS NULL`);
			expect(Number(ended?.n)).toBe(0);

			// the review ends; reminder 2 finds nothing to send when it is due: the delivery marks its row
			await endAllChains();
			await waitFor(
				async () => (await selectOne<{ skipped_at: Date | null }>(`SELECT skipped_at FROM outbox WHERE idempotency_key = :k`, { k: k2 }))?.skipped_at ?? null,
				20_000,
				200
			);
			expect(byKey(await caughtFor(f), k2)).toEqual([]);
			expect(byKey(await caughtFor(f), k1)).toHaveLength(1);
		} finally {
			await queue.close();
			await exec(`DELETE FROM outbox WHERE idempotency_key LIKE 'review:0:%'`);
		}
	}, 90_000);
});
