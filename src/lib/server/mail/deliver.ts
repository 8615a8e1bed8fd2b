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
import { exec, selectOne } from '../db';
import { sendMail, type OutgoingMail } from './transport';
import type { MailKind } from './outbox';

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

/**
 * Renderers by kind. Each kind registers its own from a module the worker imports after it can
 * compile Svelte (every HTML part is a component): ./account.ts (invitation, reset),
 * ./verification.ts, ./reminders/delivery.ts (review mail).
 */
export const renderers: Partial<Record<MailKind, Renderer>> = {};

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
		if (existing?.status === 'sending' || existing?.status === 'uncertain') {
			await exec(`UPDATE mail_log SET status = 'uncertain' WHERE idempotency_key = :key AND status = 'sending'`, { key: job.key });
			console.error(`[mail] ${job.key}: an earlier attempt stopped mid-send; not sending again (check the mail server's log)`);
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
