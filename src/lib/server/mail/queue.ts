/** The BullMQ mail queue and the outbox dispatcher that feeds it. */
import { Queue } from 'bullmq';
import { bullConnection } from '../redis';
import { jsonValue } from '../db';
import { pendingOutbox, markDispatched, markDispatchFailed } from './outbox';
import type { MailJob } from './deliver';

export const MAIL_QUEUE = 'crosstally-mail';

export const jobOptions = {
	attempts: 8,
	backoff: { type: 'exponential' as const, delay: Number(process.env.MAIL_BACKOFF_MS ?? 2_000) },
	removeOnComplete: { count: 5_000 },
	removeOnFail: { count: 5_000 }
};

let queue: Queue<MailJob> | null = null;

export function mailQueue(): Queue<MailJob> {
	if (!queue) queue = new Queue<MailJob>(MAIL_QUEUE, { connection: bullConnection({ enableOfflineQueue: false }) });
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
 * Move pending outbox rows into the queue. The BullMQ job id is the idempotency key, so a row
 * dispatched twice (a crash between add and mark) is still one job. Returns the number moved.
 */
export async function dispatchOutbox(limit = 200): Promise<number> {
	const rows = await pendingOutbox(limit);
	if (rows.length === 0) return 0;
	try {
		await mailQueue().addBulk(
			rows.map((r) => ({
				name: r.kind,
				data: { kind: r.kind, key: r.idempotency_key, payload: jsonValue<Record<string, unknown>>(r.payload) },
				opts: { ...jobOptions, jobId: r.idempotency_key.replace(/:/g, '_'), ...delayOf(r.payload) }
			}))
		);
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
