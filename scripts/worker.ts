/**
 * The background worker (a separate process; npm start runs one). It dispatches the outbox into
 * the BullMQ queue every DISPATCH_INTERVAL_MS and sends queued mail with nodemailer. Run more of
 * them against the same Redis and database to scale out: job ids and mail_log keys keep every
 * message to at most one send.
 */
import { Worker } from 'bullmq';
import { bullConnection } from '../src/lib/server/redis';
import { MAIL_QUEUE, dispatchOutbox, closeMailQueue, isBatch, requeueSingle, type QueuedMail } from '../src/lib/server/mail/queue';
import { closeDb } from '../src/lib/server/db';
import { closeMailTransport } from '../src/lib/server/mail/transport';
import { sweepMail, markMailFailed } from '../src/lib/server/mail/recover';
import { sweepMarkers } from '../src/lib/server/models/commit-marker';
import { foldDeltas } from '../src/lib/server/audit-stats/record';
import { registerSvelteHooks } from './lib/svelte-register';
import type { MailJob } from '../src/lib/server/mail/deliver';

// Every e-mail body is a Svelte component, which tsx cannot import: compile .svelte with
// svelte/compiler from here on (scripts/lib/svelte-hooks.js), then load the renderers. Dynamic
// imports on purpose: static imports are all loaded before the hook could be registered, so no
// static import above may lead to a .svelte file (the delivery and every renderer come here).
registerSvelteHooks();
const { deliver, deliverBatch } = await import('../src/lib/server/mail/deliver');
await import('../src/lib/server/mail/account'); // registers the invitation and reset e-mails
await import('../src/lib/server/mail/verification'); // registers the back-to-full-double-entry e-mail
await import('../src/lib/server/mail/reminders/delivery'); // registers the review renderers and reminders

const interval = Number(process.env.DISPATCH_INTERVAL_MS ?? 500);
const sweepMs = Number(process.env.MAIL_SWEEP_MS ?? 30_000);
const stalledMs = Number(process.env.WORKER_STALLED_MS ?? (process.env.CROSSTALLY_MODE === 'production' ? 30_000 : 3_000));

const worker = new Worker<QueuedMail>(
	MAIL_QUEUE,
	async (job) => {
		if (isBatch(job.data)) {
			// many messages due now (mail/deliver.ts deliverBatch); those that leave the batch get jobs of their own
			const results = await deliverBatch(job.data.batch, requeueSingle);
			for (const m of job.data.batch)
				if (results.get(m.key) === 'skipped' && !m.kind.startsWith('review_'))
					await markMailFailed(m.key, 'not sent: nothing to send (the account is inactive or gone)');
			const count: Record<string, number> = {};
			for (const r of results.values()) count[r] = (count[r] ?? 0) + 1;
			return count;
		}
		const result = await deliver(job.data);
		// nothing to send (an invitation to an account deactivated since): the row ends, visibly
		if (result === 'skipped' && !job.data.kind.startsWith('review_'))
			await markMailFailed(job.data.key, 'not sent: nothing to send (the account is inactive or gone)');
		return result;
	},
	{
		connection: bullConnection(),
		concurrency: Number(process.env.WORKER_CONCURRENCY ?? 32),
		stalledInterval: stalledMs,
		lockDuration: Math.max(stalledMs, 5_000),
		maxStalledCount: 2
	}
);
worker.on('failed', (job, err) => {
	if (job && isBatch(job.data)) {
		// retried as a whole; out of retries, its rows are handed back by the sweep (no job holds them)
		console.error(`[worker] batch of ${job.data.batch.length} attempt ${job.attemptsMade}: ${err.message}`);
		return;
	}
	const data = job?.data as MailJob | undefined;
	console.error(`[worker] ${data?.key} attempt ${job?.attemptsMade}: ${err.message}`);
	// out of retries: the outbox row is marked failed (visible), never left waiting
	if (job && data && job.attemptsMade >= (job.opts.attempts ?? 1)) {
		markMailFailed(data.key, err.message).catch((e) => console.error(`[worker] could not mark ${data.key} failed: ${e instanceof Error ? e.message : e}`));
	}
});
worker.on('error', (err) => console.error(`[worker] ${err.message}`));

let stopping = false;
let lastError = '';
let lastSweep = 0; // on start, then every MAIL_SWEEP_MS
async function loop() {
	while (!stopping) {
		try {
			// Redis keeps nothing across a restart, and a worker can die mid-send: every kind of mail is
			// handed back, abandoned claims retried, abandoned sends marked uncertain (mail/recover.ts).
			if (Date.now() - lastSweep > sweepMs) {
				lastSweep = Date.now();
				const s = await sweepMail();
				if (s.redispatched + s.claimsTakenBack + s.markedUncertain + s.failed > 0)
					console.error(
						`[worker] mail sweep: ${s.redispatched} re-dispatched, ${s.claimsTakenBack} abandoned claim(s) retried, ${s.markedUncertain} marked uncertain, ${s.failed} failed`
					);
				await sweepMarkers(); // commit markers older than an hour (see src/lib/server/db.ts)
				await foldDeltas(); // the audit's delta rows into its daily summaries (audit-stats/record.ts)
			}
			const n = await dispatchOutbox();
			if (lastError) console.error('[worker] dispatch recovered');
			lastError = '';
			if (n > 0) continue;
		} catch (e) {
			const msg = e instanceof Error ? e.message : String(e);
			if (msg !== lastError) console.error(`[worker] dispatch waiting: ${msg}`);
			lastError = msg;
		}
		await new Promise((r) => setTimeout(r, interval));
	}
}

async function stop() {
	if (stopping) return;
	stopping = true;
	await worker.close().catch(() => undefined);
	await closeMailQueue();
	closeMailTransport();
	await closeDb().catch(() => undefined);
	process.exit(0);
}
process.on('SIGTERM', stop);
process.on('SIGINT', stop);
console.log(`[worker] started (pid ${process.pid})`);
loop();
