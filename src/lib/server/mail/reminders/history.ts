/** The messages sent for a protocol, for the protocol page (from mail_log). */
import { models } from '../../models';
import { readRetried as read } from '../../db';
import { parseReviewKey } from './keys';

export interface ProtocolMailEntry {
	id: number;
	kind: string;
	/** 'First e-mail', 'Reminder 2', 'Reminder 4 (leads copied in)', 'Invitation', … */
	label: string;
	round: number | null;
	/** 0 for the first e-mail, 1.. for reminders, null for other kinds. */
	reminderNo: number | null;
	reviewerId: number | null;
	to: string[];
	cc: string[];
	subject: string;
	/** 'sent': accepted by the mail server. 'uncertain': a send was started but not confirmed (worker stopped mid-send). */
	status: 'sent' | 'uncertain' | 'sending';
	/** When the mail server accepted it (null while sending / uncertain). */
	sentAt: Date | null;
	createdAt: Date;
}

/** The messages sent for a protocol, oldest first. */
export async function listProtocolMail(protocolId: number, now = Date.now()): Promise<ProtocolMailEntry[]> {
	const rows = await read(() =>
		models().MailLog.findAll({
			attributes: ['id', 'idempotency_key', 'kind', 'reminder_no', 'recipients', 'subject', 'status', 'created_at', 'sent_at'],
			where: { protocol_id: protocolId },
			order: [['id', 'ASC']]
		})
	);
	return rows.map((r) => {
		const parts = r.recipients
			.split(',')
			.map((s) => s.trim())
			.filter(Boolean);
		const cc = parts.filter((s) => s.startsWith('cc:')).map((s) => s.slice(3));
		const to = parts.filter((s) => !s.startsWith('cc:'));
		const k = parseReviewKey(r.idempotency_key);
		const n = r.reminder_no ?? k?.reminderNo ?? null;
		const ofRound = (k?.round ?? 1) > 1 ? `, round ${k!.round}` : '';
		const label =
			r.kind === 'review_first'
				? `First e-mail${ofRound}`
				: r.kind === 'review_reminder'
					? `Reminder ${n}${ofRound}${cc.length ? ' (leads copied in)' : ''}`
					: r.kind;
		const stale = r.status === 'sending' && now - new Date(r.created_at).getTime() > 60_000;
		return {
			id: r.id,
			kind: r.kind,
			label,
			round: k?.round ?? null,
			reminderNo: n,
			reviewerId: k?.reviewerId ?? null,
			to,
			cc,
			subject: r.subject,
			status: r.status === 'sent' ? 'sent' : r.status === 'uncertain' || stale ? 'uncertain' : 'sending',
			sentAt: r.sent_at,
			createdAt: r.created_at
		};
	});
}
