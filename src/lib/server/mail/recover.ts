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
import { jobIdOf, mailQueue } from './queue';
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
	// the queue, not failed, and nothing logged for them (the LEFT JOIN … IS NULL of the association)
	const rows = await read(() =>
		Outbox.findAll({
			attributes: ['id', 'kind', 'idempotency_key'],
			where: { dispatched_at: { [Op.ne]: null, [Op.lt]: new Date(Date.now() - graceMs) }, failed_at: null, '$log.id$': null },
			include: [{ model: MailLog, as: 'log', attributes: [], required: false }],
			order: [['id', 'ASC']],
			limit: 500,
			subQuery: false
		})
	);
	const gone: number[] = [];
	for (const row of rows.filter((x) => !REVIEW_KINDS.has(x.kind))) {
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

/** The keys among `keys` whose BullMQ job still exists, in any state (one pipelined EXISTS per key). */
async function queuedJobs(keys: string[]): Promise<Set<string>> {
	if (keys.length === 0) return new Set();
	const q = mailQueue();
	const pipe = redis().pipeline();
	for (const k of keys) pipe.exists(q.toKey(jobIdOf(k))); // the job's hash: bull:<queue>:<job id>
	const answers = (await pipe.exec()) ?? [];
	return new Set(keys.filter((_k, i) => answers[i]?.[1] === 1));
}

/** A job that failed for good (every retry refused): its outbox row is marked failed, with the reason. */
export async function markMailFailed(key: string, reason: string): Promise<void> {
	await write(() =>
		models().Outbox.update({ failed_at: fn('CURRENT_TIMESTAMP', 3), last_error: reason.slice(0, 500) }, { where: { idempotency_key: key, failed_at: null } })
	);
}
