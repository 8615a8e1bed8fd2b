/** The BullMQ mail queue and the outbox dispatcher that feeds it. */
import { randomUUID } from 'node:crypto';
import { Queue } from 'bullmq';
import { bullConnection, redis } from '../redis';
import { jsonValue } from '../db';
import { pendingOutbox, markDispatched, markDispatchFailed } from './outbox';
import type { MailJob, Requeued } from './deliver';

export const MAIL_QUEUE = 'crosstally-mail';

export const jobOptions = {
	attempts: 8,
	backoff: { type: 'exponential' as const, delay: Number(process.env.MAIL_BACKOFF_MS ?? 2_000) },
	removeOnComplete: { count: 5_000 },
	removeOnFail: { count: 5_000 }
};

/** The name of a job that carries many messages (`deliverBatch`); every other job carries one (`deliver`). */
export const BATCH_JOB = 'batch';
export interface MailBatchJob {
	batch: MailJob[];
}
export type QueuedMail = MailJob | MailBatchJob;
export const isBatch = (data: QueuedMail): data is MailBatchJob => Array.isArray((data as MailBatchJob).batch);

/** Messages due now per queue job (issue 18): the queue's and the database's cost is per batch, not per message. */
export const mailBatchSize = () => Math.max(1, Number(process.env.MAIL_BATCH ?? 25));

export const jobIdOf = (key: string) => key.replace(/:/g, '_');

/**
 * A message dispatched in a batch has no job under its key: this Redis key says "the queue has it" to the
 * sweep (../mail/recover.ts), which otherwise would hand a batch still waiting behind a backlog to the
 * queue again. It lives MAIL_BATCH_MARK_MS (an hour) and goes with Redis, as the jobs do.
 */
export const batchedMarker = (key: string) => `crosstally:mail:batched:${jobIdOf(key)}`;
const batchedMarkMs = () => Number(process.env.MAIL_BATCH_MARK_MS ?? 3_600_000);

let queue: Queue<QueuedMail> | null = null;

export function mailQueue(): Queue<QueuedMail> {
	if (!queue) queue = new Queue<QueuedMail>(MAIL_QUEUE, { connection: bullConnection({ enableOfflineQueue: false }) });
	return queue;
}

export async function closeMailQueue(): Promise<void> {
	if (queue) {
		const q = queue;
		queue = null;
		await q.close().catch(() => undefined);
	}
}

/**
 * Move pending outbox rows into the queue. A message with a delay (a reminder not due yet) is a job of
 * its own whose id is the idempotency key, so a row dispatched twice (a crash between add and mark) is
 * still one job. Messages due now go in batches of `mailBatchSize()` per job (BullMQ's own ids): a batch
 * dispatched twice is two jobs, and mail_log keeps each message to one send. Returns the number moved.
 */
export async function dispatchOutbox(limit = 200): Promise<number> {
	// One dispatcher at a time across every worker: each reads the rows not yet marked, so two at once
	// (the cluster's two workers, woken by the same commit) handed most rows to the queue twice — mail_log
	// kept each to one send, but the second delivery of each waited and retried (the cluster run: 586
	// such retries for 731 messages). A worker that finds the lock taken returns 0 and waits for its next
	// wake-up or poll; the holder scans again for the wake-ups it got meanwhile. The lock expires by itself
	// (DISPATCH_LOCK_MS) if its holder dies.
	const token = `${process.pid}:${randomUUID()}`;
	const r = redis();
	if ((await r.set(DISPATCH_LOCK, token, 'PX', dispatchLockMs(), 'NX')) !== 'OK') return 0;
	try {
		return await dispatchLocked(limit);
	} finally {
		await r.eval(RELEASE_IF_MINE, 1, DISPATCH_LOCK, token).catch(() => undefined);
	}
}

const DISPATCH_LOCK = 'crosstally:mail:dispatching';
const dispatchLockMs = () => Number(process.env.DISPATCH_LOCK_MS ?? 30_000);
/** Delete the lock only if it still holds this dispatcher's token (it may have expired and been taken since). */
const RELEASE_IF_MINE = `if redis.call('get', KEYS[1]) == ARGV[1] then return redis.call('del', KEYS[1]) else return 0 end`;

async function dispatchLocked(limit: number): Promise<number> {
	const rows = await pendingOutbox(limit);
	if (rows.length === 0) return 0;
	const size = mailBatchSize();
	const due: MailJob[] = [];
	const jobs: { name: string; data: QueuedMail; opts: Record<string, unknown> }[] = [];
	for (const r of rows) {
		const payload = jsonValue<Record<string, unknown>>(r.payload);
		const data: MailJob = { kind: r.kind, key: r.idempotency_key, payload };
		const delay = delayOf(payload);
		if (size > 1 && !delay.delay) due.push(data);
		else jobs.push({ name: r.kind, data, opts: { ...jobOptions, jobId: jobIdOf(r.idempotency_key), ...delay } });
	}
	for (let i = 0; i < due.length; i += size) jobs.push({ name: BATCH_JOB, data: { batch: due.slice(i, i + size) }, opts: { ...jobOptions } });
	try {
		if (due.length) {
			// the markers first: a marker without its job (addBulk failed) only covers a row left pending
			const pipe = redis().pipeline();
			for (const m of due) pipe.set(batchedMarker(m.key), '1', 'PX', batchedMarkMs());
			const failed = ((await pipe.exec()) ?? []).find(([e]) => e)?.[0];
			if (failed) throw failed;
		}
		await mailQueue().addBulk(jobs);
	} catch (e) {
		await markDispatchFailed(
			rows.map((r) => r.id),
			e instanceof Error ? e.message : String(e)
		).catch(() => undefined);
		throw e;
	}
	await markDispatched(rows.map((r) => r.id));
	return rows.length;
}

/** A payload may ask to be sent no earlier than `notBefore` (ms since epoch): reminders do. */
function delayOf(payload: unknown): { delay?: number } {
	const nb = jsonValue<{ notBefore?: number }>(payload).notBefore;
	if (typeof nb !== 'number') return {};
	return { delay: Math.max(0, nb - Date.now()) };
}

/**
 * Messages a batch handed back (../mail/deliver.ts `deliverBatch`): each a job of its own, id = the key,
 * as a message dispatched alone. After an SMTP failure it waits the backoff and has the attempts left,
 * the batch having been the first: the same delays and number of attempts as a message sent alone.
 */
export async function requeueSingle(list: Requeued[]): Promise<void> {
	if (list.length === 0) return;
	const { delay } = jobOptions.backoff;
	await mailQueue().addBulk(
		list.map(({ job, afterSendFailure }) => ({
			name: job.kind,
			data: job,
			opts: {
				...jobOptions,
				jobId: jobIdOf(job.key),
				...(afterSendFailure ? { delay, attempts: jobOptions.attempts - 1, backoff: { type: 'exponential' as const, delay: 2 * delay } } : {})
			}
		}))
	);
}
