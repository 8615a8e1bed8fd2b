/**
 * Rendering and sending one outbox message, at most once per idempotency key.
 *
 * mail_log holds one row per key. Before the SMTP call the row is claimed ('sending'); after the
 * server accepts, it becomes 'sent'. An SMTP refusal releases the claim so BullMQ's retry with
 * backoff can send again. A worker killed between claim and 'sent' leaves the claim in place: the
 * retry does not send again (at most once) and logs the key so a person can check.
 */
import { exec, selectOne } from '../db';
import { config } from '../config';
import { sendMail, type OutgoingMail } from './transport';
import type { MailKind } from './outbox';
import { invitationMail, resetMail } from './templates';
import { getUser, issueToken } from '../users';

export interface MailJob {
	kind: MailKind;
	key: string;
	payload: Record<string, unknown>;
}

export interface RenderedMail extends OutgoingMail {
	protocolId?: number | null;
	reminderNo?: number | null;
}

export type Renderer = (payload: Record<string, unknown>) => Promise<RenderedMail | null>;

const TOKEN_HOURS = { invite: 72, reset: 2 };

/** Renderers by kind; the review notifications register theirs in ./review.ts. */
export const renderers: Partial<Record<MailKind, Renderer>> = {
	async invite(p) {
		const user = await getUser(Number(p.userId));
		if (!user || !user.active) return null;
		const token = await issueToken(user.id, 'invite', TOKEN_HOURS.invite);
		return invitationMail({
			email: user.email,
			name: user.name,
			link: `${config.origin}/set-password/${token}`,
			hours: TOKEN_HOURS.invite,
			invitedBy: String(p.invitedBy ?? 'An administrator')
		});
	},
	async reset(p) {
		const user = await getUser(Number(p.userId));
		if (!user || !user.active) return null;
		const token = await issueToken(user.id, 'reset', TOKEN_HOURS.reset);
		return resetMail({ email: user.email, name: user.name, link: `${config.origin}/set-password/${token}`, hours: TOKEN_HOURS.reset });
	}
};

export type DeliveryResult = 'sent' | 'already-sent' | 'uncertain' | 'skipped';

/** Test hook: pause after the SMTP server accepted, so a test can kill the worker right there. */
const pauseAfterSend = Number(process.env.MAIL_TEST_PAUSE_AFTER_SEND_MS ?? 0);

/**
 * Hooks run after a delivery attempt that ended with the message sent, already sent or possibly
 * sent ('uncertain'), never after 'skipped' (review reminders schedule the next one here). A hook
 * that throws fails the job; its retry finds the message sent and runs the hook again.
 */
export const afterDelivery: Partial<Record<MailKind, (job: MailJob, result: DeliveryResult) => Promise<void>>> = {};

export async function deliver(job: MailJob): Promise<DeliveryResult> {
	const result = await deliverOnce(job);
	const hook = afterDelivery[job.kind];
	if (hook && result !== 'skipped') await hook(job, result);
	return result;
}

async function deliverOnce(job: MailJob): Promise<DeliveryResult> {
	const existing = await selectOne<{ status: string }>('SELECT status FROM mail_log WHERE idempotency_key = :key', { key: job.key });
	if (existing?.status === 'sent') return 'already-sent';
	if (existing?.status === 'sending') {
		console.error(`[mail] ${job.key}: an earlier attempt stopped mid-send; not sending again (check the mail server's log)`);
		return 'uncertain';
	}
	const render = renderers[job.kind];
	if (!render) throw new Error(`no renderer for mail kind ${job.kind}`);
	const mail = await render(job.payload);
	if (!mail) return 'skipped';
	const claim = await exec(
		`INSERT IGNORE INTO mail_log (idempotency_key, kind, protocol_id, reminder_no, recipients, subject, status)
		 VALUES (:key, :kind, :protocolId, :reminderNo, :recipients, :subject, 'sending')`,
		{
			key: job.key,
			kind: job.kind,
			protocolId: mail.protocolId ?? null,
			reminderNo: mail.reminderNo ?? null,
			recipients: [...mail.to, ...(mail.cc ?? []).map((c) => `cc:${c}`)].join(', '),
			subject: mail.subject.slice(0, 300)
		}
	);
	if (claim.affected !== 1) return 'already-sent'; // another worker claimed it first
	let messageId: string | null;
	try {
		messageId = await sendMail({ ...mail, headers: { ...(mail.headers ?? {}), 'X-Crosstally-Key': job.key } });
	} catch (e) {
		await exec(`DELETE FROM mail_log WHERE idempotency_key = :key AND status = 'sending'`, { key: job.key });
		throw e;
	}
	if (pauseAfterSend > 0) await new Promise((r) => setTimeout(r, pauseAfterSend));
	await exec(`UPDATE mail_log SET status = 'sent', sent_at = CURRENT_TIMESTAMP(3), message_id = :messageId WHERE idempotency_key = :key`, {
		key: job.key,
		messageId
	});
	return 'sent';
}
