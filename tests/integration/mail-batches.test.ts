/**
 * Messages due now travel in batches (issue 18: one queue job and one statement per phase for many
 * messages, src/lib/server/mail/deliver.ts deliverBatch), with the real worker, Redis, MariaDB and
 * mail fake npm test starts. Each message keeps its own at-most-once send: one SMTP refusal in a batch
 * of five leaves the other four sent once, and the refused one is retried alone (a job of its own) and
 * sent once; a worker killed mid-batch (by PID) before the hand-over leaves the five claimed by the
 * batch and they are sent once each after the lease; killed after the SMTP accept, none is sent again.
 */
import { describe, expect, it } from 'vitest';
import { Queue } from 'bullmq';
import { caughtMail, waitFor } from '../helpers/http';
import { FAST_SWEEP, invite, restoreMailServicesAfterEach, sleep } from '../helpers/mail-crashes';
import { refuseNext } from '../helpers/review-fixtures';
import { killWorker, startWorker, stopWorker, workerPid } from '../helpers/services';
import { select, selectOne } from '../../src/lib/server/db';
import { bullConnection } from '../../src/lib/server/redis';
import { MAIL_QUEUE } from '../../src/lib/server/mail/queue';

const FIVE = [1, 2, 3, 4, 5];

restoreMailServicesAfterEach();

/** Stop the worker once nothing waits in the outbox: what is written next waits for the next worker alone. */
async function drainedAndStopped() {
	await waitFor(async () => (await selectOne<{ n: number }>('SELECT COUNT(*) AS n FROM outbox WHERE dispatched_at IS NULL'))?.n === 0, 30_000);
	await stopWorker();
}

/** Five invitations written while no worker runs: the worker's first dispatch puts them in one batch. */
async function fiveInvitations(tag: string): Promise<{ email: string; key: string }[]> {
	await drainedAndStopped();
	const out: { email: string; key: string }[] = [];
	for (const i of FIVE) out.push(await invite(`${tag}-${i}`));
	return out;
}

const statuses = async (keys: string[]) =>
	(await select<{ status: string }>('SELECT status FROM mail_log WHERE idempotency_key IN (:keys) ORDER BY idempotency_key', { keys })).map((r) => r.status);
const allCaught = async (msgs: { email: string }[]) => (await Promise.all(msgs.map((m) => caughtMail(m.email)))).every((x) => x.length > 0);

describe('mail in batches (issue 18)', () => {
	it('one SMTP refusal in a batch of five: the other four are sent once in the batch, the refused one alone and once', async () => {
		const msgs = await fiveInvitations('batch-refusal');
		await refuseNext(1); // the first of the five the fake receives
		await startWorker({ MAIL_BACKOFF_MS: '300' });
		await waitFor(() => allCaught(msgs), 30_000, 200);
		await sleep(2_000); // time for a second copy, if one were coming
		for (const m of msgs) expect(await caughtMail(m.email), m.email).toHaveLength(1);
		expect(await statuses(msgs.map((m) => m.key))).toEqual(['sent', 'sent', 'sent', 'sent', 'sent']);
		const queue = new Queue(MAIL_QUEUE, { connection: bullConnection() });
		try {
			// a job of its own (id = the key) only for the refused message: the four others went in the batch
			const own = await Promise.all(msgs.map((m) => queue.getJob(m.key.replace(/:/g, '_'))));
			const alone = own.filter((j) => j);
			expect(alone).toHaveLength(1);
			expect(await alone[0]!.getState()).toBe('completed');
			expect(alone[0]!.returnvalue).toBe('sent');
			// the batch: one job holding all five
			const batches = (await queue.getJobs(['completed'], 0, 200)).filter((j) => j.name === 'batch');
			const keysOf = (j: (typeof batches)[number]) => ((j.data as { batch: { key: string }[] }).batch ?? []).map((x) => x.key);
			expect(batches.filter((j) => msgs.every((m) => keysOf(j).includes(m.key)))).toHaveLength(1);
		} finally {
			await queue.close();
		}
	}, 120_000);

	it('a worker killed mid-batch before the hand-over: the five stay claimed by the batch, then each is sent once after the lease', async () => {
		const msgs = await fiveInvitations('batch-claimed');
		const keys = msgs.map((m) => m.key);
		await startWorker({ ...FAST_SWEEP, MAIL_TEST_PAUSE_BEFORE_SEND_MS: '30000' });
		await waitFor(async () => (await statuses(keys)).filter((s) => s === 'claimed').length === 5, 20_000, 50);
		// one claim for the five: the batch's token
		const tokens = await select<{ message_id: string | null }>('SELECT DISTINCT message_id FROM mail_log WHERE idempotency_key IN (:keys)', { keys });
		expect(tokens).toHaveLength(1);
		expect(tokens[0].message_id).toMatch(/^claim:/);
		await killWorker();
		expect(workerPid()).toBeNull();
		for (const m of msgs) expect(await caughtMail(m.email)).toEqual([]);
		await startWorker(FAST_SWEEP);
		await waitFor(() => allCaught(msgs), 60_000, 250);
		await sleep(3_000);
		for (const m of msgs) expect(await caughtMail(m.email), m.email).toHaveLength(1);
		expect(await statuses(keys)).toEqual(['sent', 'sent', 'sent', 'sent', 'sent']);
	}, 150_000);

	it('a worker killed mid-batch after the SMTP accept: none of the five is sent again, each ends "uncertain"', async () => {
		const msgs = await fiveInvitations('batch-sent');
		const keys = msgs.map((m) => m.key);
		await startWorker({ ...FAST_SWEEP, MAIL_TEST_PAUSE_AFTER_SEND_MS: '30000' });
		await waitFor(() => allCaught(msgs), 20_000, 50);
		await killWorker();
		for (const s of await statuses(keys)) expect(['sending', 'uncertain']).toContain(s);
		await startWorker(FAST_SWEEP);
		await waitFor(async () => (await statuses(keys)).every((s) => s === 'uncertain'), 30_000, 200);
		await sleep(4_000);
		for (const m of msgs) expect(await caughtMail(m.email), m.email).toHaveLength(1);
		expect(await statuses(keys)).toEqual(['uncertain', 'uncertain', 'uncertain', 'uncertain', 'uncertain']);
	}, 120_000);

	it('a batch waiting behind a busy worker is not handed to the queue again by the sweep', async () => {
		await drainedAndStopped();
		const a = await invite('batch-busy-a');
		// one job at a time, each pausing 8 s before the hand-over; a sweep every second with a 2 s grace
		await startWorker({ WORKER_CONCURRENCY: '1', MAIL_TEST_PAUSE_BEFORE_SEND_MS: '8000', MAIL_SWEEP_MS: '1000', MAIL_SWEEP_GRACE_MS: '2000' });
		await waitFor(async () => (await statuses([a.key]))[0] === 'claimed', 20_000, 50);
		const b = await invite('batch-busy-b'); // dispatched in a batch of its own, which waits behind a's
		await waitFor(() => allCaught([a, b]), 60_000, 250);
		await sleep(2_000);
		expect(await caughtMail(b.email)).toHaveLength(1);
		// dispatched once: it waited in its batch job for several sweeps (its row had no job under its key)
		const row = await selectOne<{ attempts: number }>('SELECT attempts FROM outbox WHERE idempotency_key = :key', { key: b.key });
		expect(row?.attempts).toBe(1);
	}, 120_000);
});
