/**
 * The background worker (a separate process; npm start runs one). It dispatches the outbox into
 * the BullMQ queue as soon as a commit wakes it (src/lib/server/mail/wake.ts), and at the latest every
 * DISPATCH_INTERVAL_MS, and sends queued mail with nodemailer. Run more of them against the same Redis
 * and database to scale out: job ids and mail_log keys keep every message to at most one send.
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
import { DispatchSignal, subscribeToWakeups } from '../src/lib/server/mail/wake';
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

// The poll is the fallback for a lost wake-up (Redis away at the PUBLISH, a process gone between COMMIT
// and PUBLISH): 2 s keeps such a message within the 5 s commit→caught goal of issue 18 with room for
// the send, at a quarter of the idle queries of the 500 ms poll that was the only way before the wake-ups.
const interval = Number(process.env.DISPATCH_INTERVAL_MS ?? 2_000);
const sweepMs = Number(process.env.MAIL_SWEEP_MS ?? 30_000);
const stalledMs = Number(process.env.WORKER_STALLED_MS ?? (process.env.CROSSTALLY_MODE === 'production' ? 30_000 : 3_000));

let inFlight = 0; // jobs whose delivery is running (see stop below)
const connection = bullConnection();
const worker = new Worker<QueuedMail>(
	MAIL_QUEUE,
	async (job) => {
		inFlight++;
		try {
			return await deliverJob(job.data);
		} finally {
			inFlight--;
		}
	},
	{
		connection,
		concurrency: Number(process.env.WORKER_CONCURRENCY ?? 32),
		stalledInterval: stalledMs,
		lockDuration: Math.max(stalledMs, 5_000),
		maxStalledCount: 2
	}
);

/** One job: a message, or a batch of messages due now. */
async function deliverJob(data: QueuedMail) {
	if (isBatch(data)) {
		// many messages due now (mail/deliver.ts deliverBatch); those that leave the batch get jobs of their own
		const results = await deliverBatch(data.batch, requeueSingle);
		for (const m of data.batch)
			if (results.get(m.key) === 'skipped' && !m.kind.startsWith('review_'))
				await markMailFailed(m.key, 'not sent: nothing to send (the account is inactive or gone)');
		const count: Record<string, number> = {};
		for (const r of results.values()) count[r] = (count[r] ?? 0) + 1;
		return count;
	}
	const result = await deliver(data);
	// nothing to send (an invitation to an account deactivated since): the row ends, visibly
	if (result === 'skipped' && !data.kind.startsWith('review_')) await markMailFailed(data.key, 'not sent: nothing to send (the account is inactive or gone)');
	return result;
}

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

const dispatchSignal = new DispatchSignal();
const wakeups = subscribeToWakeups(() => dispatchSignal.wake());
let scans = 0;

let stopping = false;
let lastError = '';
let looping = true; // until loop() has returned (stop waits for its round in progress)
let sweeping = true; // likewise for maintain()
async function loop() {
	while (!stopping) {
		try {
			scans++;
			const n = await dispatchOutbox();
			if (lastError) console.error('[worker] dispatch recovered');
			lastError = '';
			if (n > 0) continue;
		} catch (e) {
			const msg = e instanceof Error ? e.message : String(e);
			if (msg !== lastError) console.error(`[worker] dispatch waiting: ${msg}`);
			lastError = msg;
		}
		// the next commit's wake-up, or the poll; wake-ups during the scan above: one scan more, at once
		await dispatchSignal.wait(interval);
	}
}

/**
 * On start and every MAIL_SWEEP_MS, beside the dispatch loop, never in its way: a sweep reads each lost-looking
 * row's state and took 0.45–0.65 s on the bench database (500 rows of ended reviews, before outbox.skipped_at),
 * during which no committed mail was dispatched (bench:mail: the first e-mail 1.6–2.0 s after the first commit).
 * Running beside the dispatcher is what several workers always did: the sweep is safe from any number of them.
 */
const sweepStop = new DispatchSignal();
async function maintain() {
	let lastSweepError = '';
	while (!stopping) {
		try {
			// Redis keeps nothing across a restart, and a worker can die mid-send: every kind of mail is
			// handed back, abandoned claims retried, abandoned sends marked uncertain (mail/recover.ts).
			const s = await sweepMail();
			if (s.redispatched + s.claimsTakenBack + s.markedUncertain + s.failed > 0) {
				console.error(
					`[worker] mail sweep: ${s.redispatched} re-dispatched, ${s.claimsTakenBack} abandoned claim(s) retried, ${s.markedUncertain} marked uncertain, ${s.failed} failed`
				);
				dispatchSignal.wake(); // rows handed back: dispatch them now, not at the next poll
			}
			await sweepMarkers(); // commit markers older than an hour (see src/lib/server/db.ts)
			await foldDeltas(); // the audit's delta rows into its daily summaries (audit-stats/record.ts)
			lastSweepError = '';
		} catch (e) {
			const msg = e instanceof Error ? e.message : String(e);
			if (msg !== lastSweepError) console.error(`[worker] sweep waiting: ${msg}`);
			lastSweepError = msg;
		}
		await sweepStop.wait(sweepMs); // stop() wakes it
	}
}

/**
 * SIGTERM/SIGINT: stop within STOP_GRACE_MS + 1 s, before the scripts' KILL (scripts/lib/setup.sh
 * stop_pidfile, 5 s). BullMQ's close takes no new jobs and waits for those in flight (and records them
 * done in Redis); with Redis unreachable it never resolves (it waits for the connection), which kept the
 * worker alive until the KILL, so it is waited for only while a delivery of ours is still running or
 * Redis is there to close against. A delivery still running after the grace is abandoned as a crash
 * would: the stalled-job check retries the job and the mail sweep settles its rows (mail/recover.ts).
 */
const STOP_GRACE_MS = Number(process.env.WORKER_STOP_GRACE_MS ?? 3_000);
const sleep = (ms: number) => new Promise((r) => setTimeout(r, ms));
async function until(ms: number, cond: () => boolean): Promise<boolean> {
	const end = Date.now() + ms;
	while (!cond()) {
		if (Date.now() > end) return false;
		await sleep(25);
	}
	return true;
}

async function stop(signal: NodeJS.Signals) {
	if (stopping) return;
	stopping = true;
	console.error(`[worker] stopping: ${scans} outbox scans, ${dispatchSignal.wakeups} wake-ups received`);
	wakeups.close();
	dispatchSignal.wake(); // the loop's wait ends now
	sweepStop.wake(); // and the sweep's
	const t0 = Date.now();
	// the last resort: whatever still hangs (a close that never answers), end before the scripts' KILL
	setTimeout(() => {
		console.error(`[worker] not stopped ${Date.now() - t0} ms after ${signal}; exiting`);
		process.exit(1);
	}, STOP_GRACE_MS + 1_000).unref();
	let closed = false;
	worker.close().then(
		() => (closed = true),
		() => (closed = true)
	);
	const done = await until(STOP_GRACE_MS, () => closed || (inFlight === 0 && connection.status !== 'ready'));
	if (!done) console.error(`[worker] ${inFlight} job(s) still running ${STOP_GRACE_MS} ms after ${signal}: left to the stalled-job check and the mail sweep`);
	// the dispatcher's round in progress (it may be in a transaction) before its database goes
	await until(300, () => !looping && !sweeping);
	await Promise.race([Promise.allSettled([closeMailQueue(), closeDb()]), sleep(500)]);
	closeMailTransport();
	connection.disconnect();
	console.error(`[worker] stopped (${signal}) in ${Date.now() - t0} ms`);
	process.exit(done ? 0 : 1);
}
process.on('SIGTERM', stop);
process.on('SIGINT', stop);
console.log(`[worker] started (pid ${process.pid})`);
loop().finally(() => (looping = false));
maintain().finally(() => (sweeping = false));
