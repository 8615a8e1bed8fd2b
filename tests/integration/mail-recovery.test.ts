/**
 * E-mail is never lost (issue 12, item 17), with the real Redis, worker and mail fake npm test
 * starts: an invitation whose retry is waiting in Redis survives a Redis restart (stopped and
 * started by PID); a message claimed but not yet handed to SMTP when its worker is killed (by
 * PID) is sent once after all; one handed to SMTP when the worker is killed is never sent twice
 * and does not stay "sending": it is marked uncertain. Every test puts a plain worker back.
 */
import { describe, expect, it } from 'vitest';
import { Queue } from 'bullmq';
import { caughtMail, waitFor } from '../helpers/http';
import { FAST_SWEEP, invite, restoreMailServicesAfterEach, sleep } from '../helpers/mail-crashes';
import { refuseNext } from '../helpers/review-fixtures';
import { killWorker, startRedis, startWorker, stopRedis, stopWorker, workerPid } from '../helpers/services';
import { selectOne } from '../../src/lib/server/db';
import { bullConnection } from '../../src/lib/server/redis';
import { MAIL_QUEUE } from '../../src/lib/server/mail/queue';

restoreMailServicesAfterEach();

const logStatus = async (key: string) =>
	(await selectOne<{ status: string }>('SELECT status FROM mail_log WHERE idempotency_key = :key', { key }))?.status ?? null;

describe('e-mail survives crashes (item 17)', () => {
	it('an invitation waiting for its retry survives a Redis restart and is delivered once', async () => {
		await stopWorker();
		// a long backoff: the retry would come in a minute; the Redis restart loses it long before
		await startWorker({ ...FAST_SWEEP, MAIL_BACKOFF_MS: '60000' });
		await refuseNext(1);
		const m = await invite('redis-restart');
		const queue = new Queue(MAIL_QUEUE, { connection: bullConnection() });
		try {
			await waitFor(async () => (await (await queue.getJob(m.jobId))?.getState()) === 'delayed', 20_000, 100);
		} finally {
			await queue.close();
		}
		expect(await caughtMail(m.email)).toEqual([]);
		await stopRedis(); // by PID; Redis keeps nothing (--save '', no AOF): the delayed retry is gone
		await startRedis();
		const [mail] = await waitFor(async () => {
			const x = await caughtMail(m.email);
			return x.length ? x : null;
		}, 30_000);
		expect(mail.subject).toBe('You are invited to Crosstally');
		await sleep(3_000);
		expect(await caughtMail(m.email)).toHaveLength(1);
		expect(await logStatus(m.key)).toBe('sent');
	}, 90_000);

	it('a message claimed but not handed to SMTP when its worker is killed is sent once after the lease', async () => {
		await stopWorker();
		await startWorker({ ...FAST_SWEEP, MAIL_TEST_PAUSE_BEFORE_SEND_MS: '30000' });
		const m = await invite('claimed');
		await waitFor(async () => (await logStatus(m.key)) === 'claimed', 20_000, 50);
		await killWorker(); // SIGKILL by PID while the claim is held and nothing was sent
		expect(workerPid()).toBeNull();
		expect(await caughtMail(m.email)).toEqual([]);
		await startWorker(FAST_SWEEP);
		const [mail] = await waitFor(async () => {
			const x = await caughtMail(m.email);
			return x.length ? x : null;
		}, 60_000);
		expect(mail.subject).toBe('You are invited to Crosstally');
		await sleep(3_000);
		expect(await caughtMail(m.email)).toHaveLength(1);
		expect(await logStatus(m.key)).toBe('sent');
	}, 120_000);

	it('a message handed to SMTP when its worker is killed is not sent again and ends "uncertain", not "sending"', async () => {
		await stopWorker();
		await startWorker({ ...FAST_SWEEP, MAIL_TEST_PAUSE_AFTER_SEND_MS: '30000' });
		const m = await invite('mid-send');
		await waitFor(async () => (await caughtMail(m.email)).length > 0, 20_000, 50);
		await killWorker();
		// 'sending', or already 'uncertain' when the killed worker's own sweep saw the 3 s lease pass
		expect(['sending', 'uncertain']).toContain(await logStatus(m.key));
		await startWorker(FAST_SWEEP);
		await waitFor(async () => (await logStatus(m.key)) === 'uncertain', 30_000, 200);
		await sleep(4_000);
		expect(await caughtMail(m.email)).toHaveLength(1);
		expect(await logStatus(m.key)).toBe('uncertain');
	}, 90_000);

	it('a message every retry of which is refused ends visibly failed in the outbox', async () => {
		await stopWorker();
		await startWorker({ ...FAST_SWEEP, MAIL_BACKOFF_MS: '100' });
		await refuseNext(100);
		const m = await invite('refused');
		const row = await waitFor(
			() =>
				selectOne<{ failed_at: Date | null; last_error: string | null }>(
					'SELECT failed_at, last_error FROM outbox WHERE idempotency_key = :key AND failed_at IS NOT NULL',
					{ key: m.key }
				),
			60_000,
			250
		);
		expect(row.last_error).toMatch(/451|refus/i);
		expect(await caughtMail(m.email)).toEqual([]);
	}, 90_000);
});
