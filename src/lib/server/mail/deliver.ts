/**
 * Rendering and sending one outbox message, at most once per idempotency key.
 *
 * mail_log holds one row per key and the phase of the send:
 * - 'claimed': taken by a worker that renders the message and hands it to SMTP next (a render that
 *   fails or finds nothing to send deletes the claim). A claim lives MAIL_CLAIM_LEASE_MS; a claim
 *   older than that belonged to a worker that died before sending, so it is taken over (here, or
 *   by the sweep in ./recover.ts) and the message is sent after all.
 * - 'sending': handed to SMTP. An SMTP refusal deletes the row so BullMQ's retry with backoff
 *   sends again. A worker killed in this phase may or may not have had the message accepted: the
 *   row becomes 'uncertain' (by the retry, or by the sweep once the lease ends) and it is never
 *   sent again (at most once); the protocol page shows it.
 * - 'sent': accepted by the server.
 */
import { randomUUID } from 'node:crypto';
import { exec, select, selectOne } from '../db';
import { sendMail, type OutgoingMail } from './transport';
import { markSkipped, type MailKind } from './outbox';

export interface MailJob {
	kind: MailKind;
	key: string;
	payload: Record<string, unknown>;
}

export interface RenderedMail extends OutgoingMail {
	protocolId?: number | null;
	reminderNo?: number | null;
	/** What the renderer read, handed to the kind's after-delivery hook so it need not read it again. */
	context?: unknown;
}

export type Renderer = (payload: Record<string, unknown>) => Promise<RenderedMail | null>;

/** One renderer call for many messages of a kind (reads what they need once); an Error renders that message only. */
export type BatchRenderer = (payloads: Record<string, unknown>[]) => Promise<(RenderedMail | null | Error)[]>;

/**
 * Renderers by kind. Each kind registers its own from a module the worker imports after it can
 * compile Svelte (every HTML part is a component): ./account.ts (invitation, reset),
 * ./verification.ts, ./reminders/delivery.ts (review mail).
 */
export const renderers: Partial<Record<MailKind, Renderer>> = {};

/** Batch renderers by kind (optional: a kind without one is rendered message by message in a batch). */
export const batchRenderers: Partial<Record<MailKind, BatchRenderer>> = {};

export type DeliveryResult = 'sent' | 'already-sent' | 'uncertain' | 'skipped';

/** How long a claim or a send in progress may last before it counts as abandoned (a dead worker). */
export const claimLeaseMs = () => Number(process.env.MAIL_CLAIM_LEASE_MS ?? 10 * 60_000);

/** Test hooks: pause after the SMTP server accepted, or after the claim before SMTP, so a test can kill the worker right there. */
const pauseAfterSend = Number(process.env.MAIL_TEST_PAUSE_AFTER_SEND_MS ?? 0);
const pauseBeforeSend = Number(process.env.MAIL_TEST_PAUSE_BEFORE_SEND_MS ?? 0);

/**
 * Hooks run after a delivery attempt that ended with the message sent, already sent or possibly
 * sent ('uncertain'), never after 'skipped' (review reminders schedule the next one here). A hook
 * that throws fails the job; its retry finds the message sent and runs the hook again.
 */
export const afterDelivery: Partial<Record<MailKind, (job: MailJob, result: DeliveryResult, context?: unknown) => Promise<void>>> = {};

/** The after-delivery hook for many messages of a kind sent in one batch (optional: else `afterDelivery` per message). */
export const afterDeliveryMany: Partial<Record<MailKind, (sent: { job: MailJob; context?: unknown }[]) => Promise<void>>> = {};

export async function deliver(job: MailJob): Promise<DeliveryResult> {
	const { result, context } = await deliverOnce(job);
	const hook = afterDelivery[job.kind];
	if (hook && result !== 'skipped') await hook(job, result, context);
	return result;
}

// Raw SQL on purpose (../models/mail.ts has the models): this is every e-mail's hot path, and each step is
// one conditional statement whose affected-row count is the claim (INSERT IGNORE, UPDATE … WHERE status).
// The claim comes first (one statement in the common case: nothing logged for the key yet); the message is
// rendered under it, and the hand-over to SMTP writes what was rendered (recipients, subject).
async function deliverOnce(job: MailJob): Promise<{ result: DeliveryResult; context?: unknown }> {
	const claim = () =>
		exec(`INSERT IGNORE INTO mail_log (idempotency_key, kind, recipients, subject, status) VALUES (:key, :kind, '', '', 'claimed')`, {
			key: job.key,
			kind: job.kind
		});
	if ((await claim()).affected !== 1) {
		const existing = await selectOne<{ status: string; stale: number }>(
			`SELECT status, created_at < :before AS stale FROM mail_log WHERE idempotency_key = :key`,
			{ key: job.key, before: new Date(Date.now() - claimLeaseMs()) }
		);
		if (existing?.status === 'sent') return { result: 'already-sent' };
		// Handed to SMTP by another attempt: one that stopped mid-send (a worker killed), or, rarely, one still
		// at its send (a key in a batch and in a job of its own). Never sent again; 'uncertain' until that send,
		// if it is one, ends and marks it sent (its last update takes 'uncertain' too). Waiting to tell the two
		// apart would hold a crashed send's retry for the whole claim lease.
		if (existing?.status === 'sending' || existing?.status === 'uncertain') {
			await exec(`UPDATE mail_log SET status = 'uncertain' WHERE idempotency_key = :key AND status = 'sending'`, { key: job.key });
			console.error(`[mail] ${job.key}: another attempt was handed to SMTP (stopped mid-send, or still sending); not sending again`);
			return { result: 'uncertain' };
		}
		// another worker is about to send it; or one died before sending (lease over): take over
		if (existing?.status === 'claimed' && !Number(existing.stale)) throw new Error(`${job.key} is claimed by another worker; retrying later`);
		if (existing?.status === 'claimed') await exec(`DELETE FROM mail_log WHERE idempotency_key = :key AND status = 'claimed'`, { key: job.key });
		if ((await claim()).affected !== 1) throw new Error(`${job.key} was claimed by another worker first; retrying later`);
	}
	const unclaim = () => exec(`DELETE FROM mail_log WHERE idempotency_key = :key AND status = 'claimed'`, { key: job.key });
	let mail: RenderedMail | null;
	try {
		const render = renderers[job.kind];
		if (!render) throw new Error(`no renderer for mail kind ${job.kind}`);
		mail = await render(job.payload);
	} catch (e) {
		await unclaim();
		throw e;
	}
	if (!mail) {
		await unclaim();
		await markSkipped([job.key]);
		return { result: 'skipped' };
	}
	if (pauseBeforeSend > 0) await new Promise((r) => setTimeout(r, pauseBeforeSend));
	// the hand-over to SMTP: only if the claim is still ours (the sweep may have taken a stale one back)
	const handOver = await exec(
		`UPDATE mail_log SET status = 'sending', sending_at = CURRENT_TIMESTAMP(3), protocol_id = :protocolId, reminder_no = :reminderNo,
		        recipients = :recipients, subject = :subject
		 WHERE idempotency_key = :key AND status = 'claimed'`,
		{
			key: job.key,
			protocolId: mail.protocolId ?? null,
			reminderNo: mail.reminderNo ?? null,
			recipients: [...mail.to, ...(mail.cc ?? []).map((c) => `cc:${c}`)].join(', '),
			subject: mail.subject.slice(0, 300)
		}
	);
	if (handOver.affected !== 1) throw new Error(`${job.key}: the claim was taken back before sending; retrying`);
	let messageId: string | null;
	try {
		messageId = await sendMail({ ...mail, headers: { ...(mail.headers ?? {}), 'X-Crosstally-Key': job.key } });
	} catch (e) {
		await exec(`DELETE FROM mail_log WHERE idempotency_key = :key AND status = 'sending'`, { key: job.key });
		throw e;
	}
	if (pauseAfterSend > 0) await new Promise((r) => setTimeout(r, pauseAfterSend));
	// 'uncertain' too: a slow send marked by the sweep that did finish is sent after all
	await exec(
		`UPDATE mail_log SET status = 'sent', sent_at = CURRENT_TIMESTAMP(3), message_id = :messageId WHERE idempotency_key = :key AND status IN ('sending','uncertain')`,
		{
			key: job.key,
			messageId
		}
	);
	return { result: 'sent', context: mail.context };
}

// ---------------------------------------------------------------------------------------------
// Batches (issue 18): the dispatcher puts up to MAIL_BATCH messages that are due now in ONE queue
// job. The phases of every message are those above, each taken for the whole batch in one statement:
// the claims (one multi-row INSERT IGNORE), the hand-over (one UPDATE), the sends (concurrently, on the
// pooled transport), 'sent' (one UPDATE). What stays per message:
// - the claim token: each batch attempt writes a random token in message_id with its claims (the
//   column is empty until 'sent'), so when another worker holds some of the keys the batch knows which
//   rows are its own; the hand-over moves only rows still 'claimed' with its token, as the single path
//   moves only a row still 'claimed'.
// - anything off the common path leaves the batch and goes back to the single-message path above as
//   its own job (id = the key, as before): a key claimed or logged already (another worker, an earlier
//   attempt, a worker killed mid-batch), a render that throws, an SMTP refusal or broken connection
//   (that message alone, after the backoff, with the attempts left), a claim taken back before the
//   hand-over, a hook that throws.
// A worker killed mid-batch leaves each of its messages 'claimed' (taken back after the lease, sent
// after all) or 'sending' (-> 'uncertain', never sent again), exactly as a single message.

/** A batch's message that goes back to the single-message path; `afterSendFailure`: with the retry's backoff. */
export interface Requeued {
	job: MailJob;
	afterSendFailure: boolean;
}

export type BatchResult = DeliveryResult | 'requeued';

/** Raw SQL on purpose, as above: the batch's statements are the hot path of every e-mail. */
export async function deliverBatch(jobs: MailJob[], requeue: (jobs: Requeued[]) => Promise<void>): Promise<Map<string, BatchResult>> {
	const results = new Map<string, BatchResult>();
	const back: Requeued[] = [];
	const toSingle = (list: MailJob[], afterSendFailure = false) => {
		for (const job of list) {
			back.push({ job, afterSendFailure });
			results.set(job.key, 'requeued');
		}
	};
	if (jobs.length === 0) return results;
	const token = `claim:${randomUUID()}`;
	const keysOf = (list: { key: string }[]) => list.map((j) => j.key);

	// 1. the claims
	const claimed = await exec(`INSERT IGNORE INTO mail_log (idempotency_key, kind, recipients, subject, status, message_id) VALUES :rows`, {
		rows: jobs.map((j) => [j.key, j.kind, '', '', 'claimed', token])
	});
	let mine = jobs;
	if (claimed.affected !== jobs.length) {
		const own = new Set(
			(
				await select<{ idempotency_key: string }>(
					`SELECT idempotency_key FROM mail_log WHERE idempotency_key IN (:keys) AND status = 'claimed' AND message_id = :token`,
					{ keys: keysOf(jobs), token }
				)
			).map((r) => r.idempotency_key)
		);
		mine = jobs.filter((j) => own.has(j.key));
		toSingle(jobs.filter((j) => !own.has(j.key))); // logged already: the single path knows what to do
	}
	const unclaim = async (list: MailJob[]) => {
		if (list.length)
			await exec(`DELETE FROM mail_log WHERE idempotency_key IN (:keys) AND status = 'claimed' AND message_id = :token`, { keys: keysOf(list), token });
	};

	try {
		// 2. the renders, by kind (a batch renderer reads what its messages need once)
		const rendered: { job: MailJob; mail: RenderedMail }[] = [];
		const unsent: MailJob[] = [];
		const failedRender: MailJob[] = [];
		const byKind = new Map<MailKind, MailJob[]>();
		for (const j of mine) byKind.set(j.kind, [...(byKind.get(j.kind) ?? []), j]);
		for (const [kind, list] of byKind) {
			const many = batchRenderers[kind];
			const one = renderers[kind];
			let out: (RenderedMail | null | Error)[];
			if (many) out = await many(list.map((j) => j.payload)).catch((e: unknown) => list.map(() => (e instanceof Error ? e : new Error(String(e)))));
			else if (one) out = await Promise.all(list.map((j) => one(j.payload).catch((e: unknown) => (e instanceof Error ? e : new Error(String(e))))));
			else out = list.map(() => new Error(`no renderer for mail kind ${kind}`));
			list.forEach((job, i) => {
				const m = out[i];
				if (m instanceof Error) failedRender.push(job);
				else if (m === null || m === undefined) unsent.push(job);
				else rendered.push({ job, mail: m });
			});
		}
		if (unsent.length + failedRender.length) await unclaim([...unsent, ...failedRender]);
		await markSkipped(keysOf(unsent));
		for (const j of unsent) results.set(j.key, 'skipped');
		toSingle(failedRender); // rendered again there, and failed there with the renderer's own error

		if (pauseBeforeSend > 0) await new Promise((r) => setTimeout(r, pauseBeforeSend));

		// 3. the hand-over: only rows still claimed with this batch's token (the sweep may have taken one back)
		let handed = rendered;
		if (rendered.length) {
			const keys = keysOf(rendered.map((r) => r.job));
			const pick = (f: (r: (typeof rendered)[number]) => unknown) => rendered.map(f);
			const handOver = await exec(
				`UPDATE mail_log SET status = 'sending', sending_at = CURRENT_TIMESTAMP(3),
				        protocol_id = ELT(FIELD(idempotency_key, :keys), :protocolIds), reminder_no = ELT(FIELD(idempotency_key, :keys), :reminderNos),
				        recipients = ELT(FIELD(idempotency_key, :keys), :recipients), subject = ELT(FIELD(idempotency_key, :keys), :subjects)
				 WHERE idempotency_key IN (:keys) AND status = 'claimed' AND message_id = :token`,
				{
					keys,
					token,
					protocolIds: pick((r) => r.mail.protocolId ?? null),
					reminderNos: pick((r) => r.mail.reminderNo ?? null),
					recipients: pick((r) => [...r.mail.to, ...(r.mail.cc ?? []).map((c) => `cc:${c}`)].join(', ')),
					subjects: pick((r) => r.mail.subject.slice(0, 300))
				}
			);
			if (handOver.affected !== rendered.length) {
				const own = new Set(
					(
						await select<{ idempotency_key: string }>(
							`SELECT idempotency_key FROM mail_log WHERE idempotency_key IN (:keys) AND status = 'sending' AND message_id = :token`,
							{ keys, token }
						)
					).map((r) => r.idempotency_key)
				);
				handed = rendered.filter((r) => own.has(r.job.key));
				toSingle(rendered.filter((r) => !own.has(r.job.key)).map((r) => r.job)); // the claim was taken back
			}
		}

		// 4. SMTP, every message at once (the pool runs SMTP_POOL connections); a refusal is that message's alone
		const sends = await Promise.allSettled(handed.map((r) => sendMail({ ...r.mail, headers: { ...(r.mail.headers ?? {}), 'X-Crosstally-Key': r.job.key } })));
		const sent: { job: MailJob; mail: RenderedMail; messageId: string | null }[] = [];
		const refused: MailJob[] = [];
		sends.forEach((s, i) => {
			if (s.status === 'fulfilled') sent.push({ ...handed[i], messageId: s.value });
			else {
				refused.push(handed[i].job);
				console.error(`[mail] ${handed[i].job.key}: ${s.reason instanceof Error ? s.reason.message : String(s.reason)}; retrying alone`);
			}
		});
		if (refused.length) {
			await exec(`DELETE FROM mail_log WHERE idempotency_key IN (:keys) AND status = 'sending' AND message_id = :token`, { keys: keysOf(refused), token });
			toSingle(refused, true);
		}
		if (pauseAfterSend > 0 && sent.length) await new Promise((r) => setTimeout(r, pauseAfterSend));

		// 5. 'sent' ('uncertain' too: a slow send marked by the sweep that did finish is sent after all)
		if (sent.length) {
			const keys = keysOf(sent.map((s) => s.job));
			await exec(
				`UPDATE mail_log SET status = 'sent', sent_at = CURRENT_TIMESTAMP(3), message_id = ELT(FIELD(idempotency_key, :keys), :messageIds)
				 WHERE idempotency_key IN (:keys) AND status IN ('sending','uncertain')`,
				{ keys, messageIds: sent.map((s) => s.messageId) }
			);
			for (const s of sent) results.set(s.job.key, 'sent');

			// 6. the kinds' hooks (the next reminder); one that throws sends its messages to the single path, which
			// finds them sent and runs the hook again, as a failed single job's retry does
			const sentByKind = new Map<MailKind, typeof sent>();
			for (const s of sent) sentByKind.set(s.job.kind, [...(sentByKind.get(s.job.kind) ?? []), s]);
			for (const [kind, list] of sentByKind) {
				const many = afterDeliveryMany[kind];
				const one = afterDelivery[kind];
				if (many) {
					await many(list.map((s) => ({ job: s.job, context: s.mail.context }))).catch((e: unknown) => {
						console.error(`[mail] after-delivery of ${list.length} ${kind}: ${e instanceof Error ? e.message : e}; retrying one by one`);
						toSingle(list.map((s) => s.job));
					});
				} else if (one) {
					await Promise.all(
						list.map((s) =>
							one(s.job, 'sent', s.mail.context).catch((e: unknown) => {
								console.error(`[mail] after-delivery of ${s.job.key}: ${e instanceof Error ? e.message : e}; retrying alone`);
								toSingle([s.job]);
							})
						)
					);
				}
			}
		}
	} catch (e) {
		// a statement failed (the batch job is retried with a new token): claims not handed over are given back
		// now rather than after the lease; rows already 'sending' stay as they are
		await unclaim(mine).catch(() => undefined);
		throw e;
	} finally {
		// even when a statement above failed (the batch job is then retried): what left the batch is queued alone
		if (back.length) await requeue(back);
	}
	return results;
}
