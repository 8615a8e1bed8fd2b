/**
 * The sweep that makes every outbox row end delivered or visibly failed, after any crash (the
 * worker runs it on start and every MAIL_SWEEP_MS; it is safe from any number of workers):
 *
 * 1. Claims whose lease ended ('claimed': a worker died before handing the message to SMTP) are
 *    taken back and their rows handed to the queue again: the message is sent after all.
 * 2. Sends whose lease ended ('sending': handed to SMTP, never confirmed) become 'uncertain':
 *    never sent twice, shown as not confirmed.
 * 3. Rows handed to the queue whose job is gone (Redis keeps nothing across a restart: a job waiting
 *    for its retry or its delay vanishes) and which nothing was logged for are handed to the queue
 *    again; every kind of mail (invitations, password resets, review mail). A job that still
 *    exists is left to BullMQ; one that failed for good marks its row failed (`failed_at`).
 * Re-adding a job is idempotent (the job id is the idempotency key) and mail_log keeps every
 * message to one send.
 */
import { Op, fn } from 'sequelize';
import { models } from '../models';
import { autocommit as write, readRetried as read } from '../db';
import { batchedMarker, jobIdOf, mailQueue } from './queue';
import { redis } from '../redis';
import { claimLeaseMs } from './deliver';
import { recoverLostReviewMail } from './reminders/scheduling';

const REVIEW_KINDS = new Set(['review_first', 'review_reminder']);

export interface SweepResult {
	claimsTakenBack: number;
	markedUncertain: number;
	redispatched: number;
	failed: number;
}

export async function sweepMail(graceMs = Number(process.env.MAIL_SWEEP_GRACE_MS ?? 60_000)): Promise<SweepResult> {
	const before = new Date(Date.now() - claimLeaseMs());
	const r: SweepResult = { claimsTakenBack: 0, markedUncertain: 0, redispatched: 0, failed: 0 };
	const { Outbox, MailLog } = models();

	// 1. abandoned claims: give the rows back to the dispatcher
	const stale = { status: 'claimed' as const, created_at: { [Op.lt]: before } };
	const claims = await read(() => MailLog.findAll({ attributes: ['idempotency_key'], where: stale }));
	for (const c of claims) {
		const deleted = await write(() => MailLog.destroy({ where: { idempotency_key: c.idempotency_key, ...stale } }));
		if (deleted === 1) {
			await write(() => Outbox.update({ dispatched_at: null }, { where: { idempotency_key: c.idempotency_key, failed_at: null } }));
			r.claimsTakenBack++;
		}
	}

	// 2. abandoned sends: visibly uncertain, never sent again
	[r.markedUncertain] = await write(() => MailLog.update({ status: 'uncertain' }, { where: { status: 'sending', sending_at: { [Op.lt]: before } } }));

	// 3. rows whose job is gone (other kinds; review mail has its own rule for ended chains): handed to
	// the queue, not failed, not given up as nothing to send (skipped_at), and nothing logged for them
	// (the LEFT JOIN … IS NULL of the association)
	const rows = await read(() =>
		Outbox.findAll({
			attributes: ['id', 'kind', 'idempotency_key'],
			where: { dispatched_at: { [Op.ne]: null, [Op.lt]: new Date(Date.now() - graceMs) }, failed_at: null, skipped_at: null, '$log.id$': null },
			include: [{ model: MailLog, as: 'log', attributes: [], required: false }],
			order: [['id', 'ASC']],
			limit: 500,
			subQuery: false
		})
	);
	const gone: number[] = [];
	const others = rows.filter((x) => !REVIEW_KINDS.has(x.kind));
	const batched = await inBatches(others.map((x) => x.idempotency_key));
	for (const row of others) {
		if (batched.has(row.idempotency_key)) continue; // in a batch job: BullMQ has it
		const job = await mailQueue().getJob(jobIdOf(row.idempotency_key));
		if (!job) {
			gone.push(row.id);
			continue;
		}
		const state = await job.getState();
		if (state === 'failed') {
			const lastError = (job.failedReason ?? 'failed').slice(0, 500);
			await write(() => Outbox.update({ failed_at: fn('CURRENT_TIMESTAMP', 3), last_error: lastError }, { where: { id: row.id, failed_at: null } }));
			r.failed++;
		}
		// waiting, delayed, active: BullMQ has it; completed ('skipped': nothing to send): done
	}
	if (gone.length) await write(() => Outbox.update({ dispatched_at: null }, { where: { id: gone } }));
	r.redispatched = gone.length + (await recoverLostReviewMail(graceMs, Date.now(), queuedJobs));
	return r;
}

/**
 * The keys among `keys` whose BullMQ job still exists, in any state, or that went to the queue in a batch
 * (./queue.ts batchedMarker): two pipelined EXISTS per key, one round trip.
 */
async function queuedJobs(keys: string[]): Promise<Set<string>> {
	if (keys.length === 0) return new Set();
	const q = mailQueue();
	const pipe = redis().pipeline();
	for (const k of keys) pipe.exists(q.toKey(jobIdOf(k)), batchedMarker(k)); // the job's hash (bull:<queue>:<job id>), the marker
	const answers = (await pipe.exec()) ?? [];
	return new Set(keys.filter((_k, i) => Number(answers[i]?.[1] ?? 0) > 0));
}

/** The keys among `keys` that went to the queue in a batch (one pipelined EXISTS per key). */
async function inBatches(keys: string[]): Promise<Set<string>> {
	if (keys.length === 0) return new Set();
	const pipe = redis().pipeline();
	for (const k of keys) pipe.exists(batchedMarker(k));
	const answers = (await pipe.exec()) ?? [];
	return new Set(keys.filter((_k, i) => answers[i]?.[1] === 1));
}

/** A job that failed for good (every retry refused): its outbox row is marked failed, with the reason. */
export async function markMailFailed(key: string, reason: string): Promise<void> {
	// not while mail_log holds the key: a batch and a job of its own can both hold a key (a batch dispatched
	// twice), and the one that lost the claim gives up in the end while the other sent it (or may have: sending,
	// uncertain) or is sending it (claimed: sent, or taken back by the sweep after the lease and sent then)
	const logged = await read(() => models().MailLog.findOne({ attributes: ['status'], where: { idempotency_key: key } }));
	if (logged) return;
	await write(() =>
		models().Outbox.update({ failed_at: fn('CURRENT_TIMESTAMP', 3), last_error: reason.slice(0, 500) }, { where: { idempotency_key: key, failed_at: null } })
	);
}
