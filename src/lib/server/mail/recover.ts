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
import { exec, select } from '../db';
import { mailQueue } from './queue';
import { claimLeaseMs } from './deliver';
import { recoverLostReviewMail } from './reminders/scheduling';

const REVIEW_KINDS = new Set(['review_first', 'review_reminder']);
const jobIdOf = (key: string) => key.replace(/:/g, '_');

export interface SweepResult {
	claimsTakenBack: number;
	markedUncertain: number;
	redispatched: number;
	failed: number;
}

export async function sweepMail(graceMs = Number(process.env.MAIL_SWEEP_GRACE_MS ?? 60_000)): Promise<SweepResult> {
	const before = new Date(Date.now() - claimLeaseMs());
	const r: SweepResult = { claimsTakenBack: 0, markedUncertain: 0, redispatched: 0, failed: 0 };

	// 1. abandoned claims: give the rows back to the dispatcher
	const claims = await select<{ idempotency_key: string }>(`SELECT idempotency_key FROM mail_log WHERE status = 'claimed' AND created_at < :before`, {
		before
	});
	for (const c of claims) {
		const { affected } = await exec(`DELETE FROM mail_log WHERE idempotency_key = :key AND status = 'claimed' AND created_at < :before`, {
			key: c.idempotency_key,
			before
		});
		if (affected === 1) {
			await exec(`UPDATE outbox SET dispatched_at = NULL WHERE idempotency_key = :key AND failed_at IS NULL`, { key: c.idempotency_key });
			r.claimsTakenBack++;
		}
	}

	// 2. abandoned sends: visibly uncertain, never sent again
	r.markedUncertain = (await exec(`UPDATE mail_log SET status = 'uncertain' WHERE status = 'sending' AND sending_at < :before`, { before })).affected;

	// 3. rows whose job is gone (other kinds; review mail has its own rule for ended chains)
	const rows = await select<{ id: number; kind: string; idempotency_key: string; payload: unknown }>(
		`SELECT o.id, o.kind, o.idempotency_key, o.payload FROM outbox o
		   LEFT JOIN mail_log m ON m.idempotency_key = o.idempotency_key
		  WHERE o.dispatched_at IS NOT NULL AND o.dispatched_at < :before AND o.failed_at IS NULL AND m.id IS NULL
		  ORDER BY o.id LIMIT 500`,
		{ before: new Date(Date.now() - graceMs) }
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
			await exec(`UPDATE outbox SET failed_at = CURRENT_TIMESTAMP(3), last_error = :e WHERE id = :id AND failed_at IS NULL`, {
				id: row.id,
				e: (job.failedReason ?? 'failed').slice(0, 500)
			});
			r.failed++;
		}
		// waiting, delayed, active: BullMQ has it; completed ('skipped': nothing to send): done
	}
	if (gone.length) await exec(`UPDATE outbox SET dispatched_at = NULL WHERE id IN (:ids)`, { ids: gone });
	r.redispatched = gone.length + (await recoverLostReviewMail(graceMs));
	return r;
}

/** A job that failed for good (every retry refused): its outbox row is marked failed, with the reason. */
export async function markMailFailed(key: string, reason: string): Promise<void> {
	await exec(`UPDATE outbox SET failed_at = CURRENT_TIMESTAMP(3), last_error = :reason WHERE idempotency_key = :key AND failed_at IS NULL`, {
		key,
		reason: reason.slice(0, 500)
	});
}
