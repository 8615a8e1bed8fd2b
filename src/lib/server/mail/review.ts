/**
 * Review notifications: the first e-mail when a protocol reaches `in_review`, a reminder every
 * interval while discrepancies stay open, and escalation (leads copied in) after N reminders.
 *
 * How a chain of messages works
 * - The reconciliation transaction calls `notifyReviewStarted`, which writes the outbox row of
 *   message 0 (the first e-mail). The worker's dispatcher moves it into BullMQ; `deliver` sends it
 *   at most once per idempotency key.
 * - After a review message was sent (or possibly sent: a worker killed mid-send), the
 *   `afterDelivery` hook writes the outbox row of the next reminder with `notBefore` = now +
 *   interval; the dispatcher turns it into a delayed job. Writing it is idempotent (unique key).
 * - Every message re-checks the database when it is rendered: the protocol is still `in_review`,
 *   in the same round, with the same reviewer, and this chain is still the current one (see
 *   below); reminders also need at least one open discrepancy. Otherwise nothing is sent and
 *   nothing is scheduled: the chain ends.
 *
 * Keys: `review:<protocol>:r<round>:u<reviewer>:<n>` (n = 0 first e-mail, 1.. reminders). A reviewer
 * assigned again in the same round (A → B → A) gets a new chain `…:u<reviewer>.<generation>:<n>`;
 * the current chain of a protocol round is the one whose first e-mail was written last.
 *
 * E-mails name protocols by the examinee's pseudonymous code only: never a name or birth date.
 */
import { exec, select, selectOne, type Tx } from '../db';
import { config } from '../config';
import { models } from '../models';
import { enqueueMail } from './outbox';
import { afterDelivery, renderers, type DeliveryResult, type MailJob, type RenderedMail } from './deliver';
import { esc, layout, button } from './templates';
import { usersWithRole } from '../users';
import { charDiff, type DiffSegment } from '../../scoring/diff';
import { KIND_EXPLANATIONS, kindName as vocabularyKindName, type Kind } from '../../scoring/kinds';
import { FIELD_LABELS, fieldWords } from '../../status';

// ---------------------------------------------------------------------------------------------
// Settings (per site, in the `settings` table; defaults from the environment)

export interface ReviewMailSettings {
	/** Minutes between reminders (default 1440 = 24 h; demo and tests use minutes or seconds). */
	reminderIntervalMinutes: number;
	/** Reminders after which leads are copied in: reminder N+1 and later carry the leads in cc. */
	escalateAfterReminders: number;
	/**
	 * What a review e-mail says about the discrepancies: `full` lists each one with both values and the
	 * recomputed value; `counts` gives only how many (by kind) and the link, for sites that keep
	 * scores out of e-mail.
	 */
	detail: MailDetail;
}

export type MailDetail = 'full' | 'counts';
const validDetail = (d: unknown): d is MailDetail => d === 'full' || d === 'counts';

export const REVIEW_MAIL_SETTING = 'review_mail';

export async function reviewMailSettings(t?: Tx): Promise<ReviewMailSettings> {
	const defaults: ReviewMailSettings = {
		reminderIntervalMinutes: config.reminderIntervalMinutes,
		escalateAfterReminders: config.escalateAfterReminders,
		detail: validDetail(config.mailDetail) ? config.mailDetail : 'full'
	};
	const row = await models().Setting.findByPk(REVIEW_MAIL_SETTING, { transaction: t ?? undefined });
	if (!row) return defaults;
	try {
		const v = json<Partial<ReviewMailSettings>>(row.value);
		return {
			reminderIntervalMinutes: validInterval(v.reminderIntervalMinutes) ? v.reminderIntervalMinutes : defaults.reminderIntervalMinutes,
			escalateAfterReminders: validCount(v.escalateAfterReminders) ? v.escalateAfterReminders : defaults.escalateAfterReminders,
			detail: validDetail(v.detail) ? v.detail : defaults.detail
		};
	} catch {
		return defaults;
	}
}

/** JSON columns (LONGTEXT with a JSON_VALID check) come back parsed from some queries, as text from others. */
function json<T>(v: unknown): T {
	return (typeof v === 'string' ? JSON.parse(v) : v) as T;
}

const validInterval = (n: unknown): n is number => typeof n === 'number' && Number.isFinite(n) && n > 0 && n <= 60 * 24 * 90;
const validCount = (n: unknown): n is number => typeof n === 'number' && Number.isInteger(n) && n >= 0 && n <= 1000;

/** Save the site's reminder settings (admin service settings). Throws on values out of range. */
export async function saveReviewMailSettings(input: Omit<ReviewMailSettings, 'detail'> & { detail?: MailDetail }, t?: Tx): Promise<void> {
	const s: ReviewMailSettings = { ...input, detail: input.detail ?? 'full' };
	if (!validInterval(s.reminderIntervalMinutes)) throw new Error('reminderIntervalMinutes must be above 0 and at most 90 days');
	if (!validCount(s.escalateAfterReminders)) throw new Error('escalateAfterReminders must be a whole number from 0 to 1000');
	if (!validDetail(s.detail)) throw new Error('detail must be "full" or "counts"');
	await models().Setting.upsert({ name: REVIEW_MAIL_SETTING, value: s }, { transaction: t ?? undefined });
}

// ---------------------------------------------------------------------------------------------
// Keys

export interface ReviewMailPayload {
	protocolId: number;
	round: number;
	reviewerId: number;
	/** The chain: `review:<p>:r<round>:u<reviewer>` plus `.<generation>` from the second assignment on. */
	chain: string;
	/** 0 for the first e-mail, 1.. for reminders. */
	reminderNo: number;
	notBefore?: number;
	/** Why this round exists, for a round after the first: a reopen or an amendment, with its reason. */
	why?: { action: 'reopen' | 'amendment'; reason: string; field?: string };
}

const roundPrefix = (protocolId: number, round: number) => `review:${protocolId}:r${round}:`;
export const chainOf = (protocolId: number, round: number, reviewerId: number, generation = 1) =>
	`${roundPrefix(protocolId, round)}u${reviewerId}${generation > 1 ? `.${generation}` : ''}`;
export const reviewMailKey = (chain: string, reminderNo: number) => `${chain}:${reminderNo}`;

/** Parse a review key back into its parts (null for other keys). */
export function parseReviewKey(key: string): { protocolId: number; round: number; reviewerId: number; generation: number; reminderNo: number } | null {
	const m = key.match(/^review:(\d+):r(\d+):u(\d+)(?:\.(\d+))?:(\d+)$/);
	if (!m) return null;
	return { protocolId: +m[1], round: +m[2], reviewerId: +m[3], generation: m[4] ? +m[4] : 1, reminderNo: +m[5] };
}

/** The chain whose first e-mail was written last for this protocol round (the current one). */
async function currentChain(protocolId: number, round: number, t?: Tx): Promise<string | null> {
	const row = await selectOne<{ idempotency_key: string }>(
		`SELECT idempotency_key FROM outbox WHERE idempotency_key LIKE :prefix AND kind = 'review_first' ORDER BY id DESC LIMIT 1`,
		{ prefix: `${roundPrefix(protocolId, round)}%` },
		t
	);
	return row ? row.idempotency_key.replace(/:0$/, '') : null;
}

// ---------------------------------------------------------------------------------------------
// The contract with the workflow

/**
 * Inside the reconciliation transaction, when a protocol reaches `in_review`: the outbox row of the
 * reviewer's first e-mail. Calling it again for the same protocol, round and reviewer is a no-op.
 */
export async function notifyReviewStarted(protocolId: number, round: number, reviewerId: number, t: Tx, why?: ReviewMailPayload['why']): Promise<void> {
	const chain = chainOf(protocolId, round, reviewerId);
	const payload: ReviewMailPayload = { protocolId, round, reviewerId, chain, reminderNo: 0, ...(why ? { why } : {}) };
	await enqueueMail('review_first', reviewMailKey(chain, 0), { ...payload }, t);
}

/**
 * Inside the reassignment transaction: the new reviewer gets their own first e-mail (and their own
 * reminders); the old reviewer's reminders stop (each reminder re-checks the assigned reviewer and
 * the current chain). A no-op when the current chain already belongs to `newReviewerId`.
 */
export async function notifyReviewerChanged(protocolId: number, round: number, newReviewerId: number, t: Tx): Promise<void> {
	const current = await currentChain(protocolId, round, t);
	const mine = chainOf(protocolId, round, newReviewerId);
	if (current && (current === mine || current.startsWith(`${mine}.`))) return;
	const earlier = await select<{ idempotency_key: string }>(
		`SELECT idempotency_key FROM outbox WHERE idempotency_key LIKE :prefix AND kind = 'review_first'`,
		{ prefix: `${mine}%` },
		t
	);
	const generation = earlier.filter((r) => r.idempotency_key === `${mine}:0` || r.idempotency_key.startsWith(`${mine}.`)).length + 1;
	const chain = chainOf(protocolId, round, newReviewerId, generation);
	const payload: ReviewMailPayload = { protocolId, round, reviewerId: newReviewerId, chain, reminderNo: 0 };
	await enqueueMail('review_first', reviewMailKey(chain, 0), { ...payload }, t);
}

// ---------------------------------------------------------------------------------------------
// What a message says

interface ProtocolRow {
	id: number;
	status: string;
	round: number;
	reviewer_id: number;
	code: string;
	test_date: string | Date;
	battery: string | null;
}

interface DiscrepancyRow {
	id: number;
	position: number;
	test_code: string;
	test_name: string | null;
	field: string;
	pass: 'first' | 'second' | 'both';
	kind: string;
	value: string | null;
	other: string | null;
	expected: string | null;
	out_of_range: number;
}

/** Field names in a sentence: the same words as the screens (src/lib/status.ts). */
export const FIELD_WORDS: Record<string, string> = Object.fromEntries(Object.keys(FIELD_LABELS).map((f) => [f, fieldWords(f)]));

const PASS_WORDS = { first: 'first pass', second: 'second pass', both: 'both passes' } as const;

/** The kind's name as the Review chip shows it ("Digits swapped"): one list, src/lib/scoring/kinds.ts. */
export function kindName(kind: string): string {
	return vocabularyKindName(kind);
}

export function kindWords(kind: string): string {
	return KIND_EXPLANATIONS[kind as Kind] ?? 'Differs, with no recognisable pattern.';
}

/** The state a message depends on, or null when the chain has ended. */
async function loadState(p: ReviewMailPayload, needOpen: boolean) {
	const protocol = await selectOne<ProtocolRow>(
		`SELECT p.id, p.status, p.round, p.reviewer_id, e.code, p.test_date, b.name AS battery
		 FROM protocols p JOIN examinees e ON e.id = p.examinee_id LEFT JOIN batteries b ON b.id = p.battery_id
		 WHERE p.id = :id`,
		{ id: p.protocolId }
	);
	if (!protocol || protocol.status !== 'in_review' || protocol.round !== p.round || protocol.reviewer_id !== p.reviewerId) return null;
	if ((await currentChain(p.protocolId, p.round)) !== p.chain) return null;
	const open = await select<DiscrepancyRow>(
		`SELECT d.id, d.position, d.test_code, d.field, d.pass, d.kind, d.value, d.other, d.expected, d.out_of_range,
		        (SELECT t.name FROM protocol_tests pt JOIN tests t ON t.id = pt.test_id
		          WHERE pt.protocol_id = d.protocol_id AND t.code = d.test_code LIMIT 1) AS test_name
		 FROM discrepancies d
		 WHERE d.protocol_id = :id AND d.round = :round AND d.resolved_at IS NULL
		 ORDER BY d.position`,
		{ id: p.protocolId, round: p.round }
	);
	if (needOpen && open.length === 0) return null;
	const reviewer = await selectOne<{ email: string; name: string; active: number }>('SELECT email, name, active FROM users WHERE id = :id', {
		id: p.reviewerId
	});
	if (!reviewer || !reviewer.active) return null;
	return { protocol, open, reviewer };
}

/** The two entered values (first pass, second pass) of a discrepancy. */
export function passValues(d: Pick<DiscrepancyRow, 'pass' | 'value' | 'other'>): { first: string | null; second: string | null } {
	return d.pass === 'second' ? { first: d.other, second: d.value } : { first: d.value, second: d.other };
}

/** The first and second value with the characters the other lacks marked: text `4[7]`, HTML <mark>. */
export function markedValues(first: string | null, second: string | null): { text: [string, string]; html: [string, string] } {
	const segs: DiffSegment[] = charDiff(first ?? '', second ?? '');
	const side = (drop: DiffSegment['kind']) => segs.filter((s) => s.kind !== drop);
	const txt = (list: DiffSegment[], empty: boolean) => (empty ? '(empty)' : list.map((s) => (s.kind === 'same' ? s.text : `[${s.text}]`)).join(''));
	const htm = (list: DiffSegment[], empty: boolean) =>
		empty
			? '<em style="color:#4a5563">empty</em>'
			: list
					.map((s) =>
						s.kind === 'same'
							? esc(s.text)
							: `<mark style="background:#f6d776;color:#1d2733;font-weight:700;padding:0 1px;border:1px solid #9a4a06;text-decoration:underline">${esc(s.text)}</mark>`
					)
					.join('');
	const e1 = first === null || first === '';
	const e2 = second === null || second === '';
	return { text: [txt(side('added'), e1), txt(side('removed'), e2)], html: [htm(side('added'), e1), htm(side('removed'), e2)] };
}

const plural = (n: number, one: string, many = `${one}s`) => `${n} ${n === 1 ? one : many}`;

/** "3 (2 Digits swapped, 1 Wrong digit)": how many, by kind name, no values. */
function countsByKind(list: Pick<DiscrepancyRow, 'kind'>[]): string {
	const by = new Map<string, number>();
	for (const d of list) by.set(d.kind, (by.get(d.kind) ?? 0) + 1);
	return `${list.length} (${[...by].map(([k, m]) => `${m} ${kindName(k)}`).join(', ')})`;
}

export interface ReviewMailContent {
	reminderNo: number;
	code: string;
	link: string;
	reviewerName: string;
	battery: string | null;
	testDate: string;
	discrepancies: DiscrepancyRow[];
	escalated: boolean;
	intervalMinutes: number;
	/** `counts`: no values in the message, only how many of each kind and the link. Default `full`. */
	detail?: MailDetail;
	/** The review round, and why it was opened (reopen or amendment) when it is not the first. */
	round?: number;
	why?: ReviewMailPayload['why'];
}

function everyWords(minutes: number): string {
	if (minutes >= 1440 && minutes % 1440 === 0) return minutes === 1440 ? 'every day' : `every ${minutes / 1440} days`;
	if (minutes >= 60 && minutes % 60 === 0) return minutes === 60 ? 'every hour' : `every ${minutes / 60} hours`;
	if (minutes >= 1) return `every ${+minutes.toFixed(1)} minutes`;
	return `every ${Math.round(minutes * 60)} seconds`;
}

export function subjectOf(c: Pick<ReviewMailContent, 'reminderNo' | 'code' | 'discrepancies' | 'escalated'>): string {
	const n = c.discrepancies.length;
	if (c.reminderNo === 0)
		return n === 0
			? `Sign-off needed: protocol ${c.code} (no discrepancies)`
			: `Review needed: protocol ${c.code} (${plural(n, 'discrepancy', 'discrepancies')})`;
	return `${c.escalated ? 'Escalated reminder' : 'Reminder'} ${c.reminderNo}: protocol ${c.code} has ${plural(n, 'open discrepancy', 'open discrepancies')}`;
}

/** Plain-text and HTML parts of a review message (exported for tests and previews). */
export function reviewMailBody(c: ReviewMailContent): { subject: string; text: string; html: string } {
	const subject = subjectOf(c);
	const n = c.discrepancies.length;
	const date = typeof c.testDate === 'string' ? c.testDate : '';
	const roundWords =
		c.round && c.round > 1 && c.why
			? c.why.action === 'reopen'
				? `It was reopened for review round ${c.round}. Reason: ${c.why.reason}`
				: `It was amended (${c.why.field ?? 'one field'}) and needs review round ${c.round}. Reason: ${c.why.reason}`
			: '';
	const intro =
		c.reminderNo === 0
			? n === 0
				? `Protocol ${c.code} is ready for review: both passes and the recomputation agree everywhere. It needs your sign-off.`
				: `Protocol ${c.code} is ready for review: ${plural(n, 'discrepancy needs', 'discrepancies need')} your decision.`
			: `Reminder ${c.reminderNo}: protocol ${c.code} still has ${plural(n, 'open discrepancy', 'open discrepancies')}.`;
	const counts = n > 0 ? countsByKind(c.discrepancies) : '';
	const escalation = c.escalated ? `The leads are copied in because this protocol has had ${plural(c.reminderNo - 1, 'reminder')} without being resolved.` : '';
	const schedule = n > 0 ? `Until every discrepancy is resolved, a reminder goes out ${everyWords(c.intervalMinutes)}.` : '';
	const facts = [`Protocol: ${c.code}`, c.battery ? `Battery: ${c.battery}` : null, date ? `Test date: ${date}` : null].filter(Boolean) as string[];

	const rows = c.discrepancies.map((d, i) => {
		const { first, second } = passValues(d);
		const m = markedValues(first, second);
		const test = d.test_name ? `${d.test_name} (${d.test_code})` : d.test_code;
		const field = FIELD_WORDS[d.field] ?? d.field;
		const expected = d.expected ?? (d.field === 'raw' ? 'none for raw scores' : 'none (raw score missing or out of range)');
		return { d, i, m, test, field, expected };
	});

	const textList = rows
		.map(
			({ d, i, m, test, field, expected }) =>
				`${i + 1}. ${test}, ${field} (${PASS_WORDS[d.pass]})
   First pass:  ${m.text[0]}
   Second pass: ${m.text[1]}
   Recomputed:  ${expected}
   Kind: ${kindName(d.kind)}${d.out_of_range ? ' (out of range)' : ''}: ${kindWords(d.kind)}`
		)
		.join('\n\n');

	const text = [
		`Hello ${c.reviewerName},`,
		'',
		intro,
		roundWords,
		escalation,
		'',
		facts.join('\n'),
		'',
		n > 0
			? c.detail === 'counts'
				? `${c.reminderNo === 0 ? 'Discrepancies' : 'Still open'}: ${counts}. The values are on the Review screen (this site keeps scores out of e-mail).`
				: `${c.reminderNo === 0 ? 'Discrepancies' : 'Still open'} (characters that differ between the passes are in [brackets]):\n\n${textList}`
			: '',
		'',
		`Open the Review screen: ${c.link}`,
		'',
		schedule
	]
		.filter((l, i, all) => !(l === '' && all[i - 1] === ''))
		.join('\n')
		.trim();

	const cell = 'padding:6px 8px;border-bottom:1px solid #e6dfd2;vertical-align:top';
	const head = `padding:6px 8px;border-bottom:2px solid #dcd4c6;text-align:left;font-size:12px;color:#4a5563`;
	const tableHtml =
		n === 0
			? ''
			: c.detail === 'counts'
				? `<p>${esc(c.reminderNo === 0 ? 'Discrepancies' : 'Still open')}: ${esc(counts)}. The values are on the Review screen (this site keeps scores out of e-mail).</p>`
				: `<table role="presentation" cellpadding="0" cellspacing="0" width="100%" style="border-collapse:collapse;margin:12px 0;font-size:13px">
<thead><tr><th style="${head}">#</th><th style="${head}">Test · field</th><th style="${head}">First pass</th><th style="${head}">Second pass</th><th style="${head}">Recomputed</th><th style="${head}">Kind</th></tr></thead>
<tbody>${rows
						.map(
							({ d, i, m, test, field, expected }) => `<tr>
<td style="${cell}">${i + 1}</td>
<td style="${cell}">${esc(test)}<br><span style="color:#4a5563">${esc(field)} · ${esc(PASS_WORDS[d.pass])}</span></td>
<td style="${cell};font-family:monospace;font-size:14px">${m.html[0]}</td>
<td style="${cell};font-family:monospace;font-size:14px">${m.html[1]}</td>
<td style="${cell};font-family:monospace;font-size:14px">${d.expected === null ? `<span style="color:#4a5563;font-family:'IBM Plex Sans',Arial,sans-serif;font-size:12px">${esc(expected)}</span>` : esc(expected)}</td>
<td style="${cell}"><strong>${esc(kindName(d.kind))}</strong>${d.out_of_range ? ' <span style="color:#9a3412">(out of range)</span>' : ''}<br><span style="color:#4a5563;font-size:12px">${esc(kindWords(d.kind))}</span></td>
</tr>`
						)
						.join('\n')}</tbody></table>
<p style="color:#4a5563;font-size:12px">Highlighted: the characters that differ between the two passes.</p>`;

	const html = layout(
		subject,
		`<p>Hello ${esc(c.reviewerName)},</p><p>${esc(intro)}</p>${roundWords ? `<p><strong>${esc(roundWords)}</strong></p>` : ''}${escalation ? `<p style="color:#9a3412"><strong>${esc(escalation)}</strong></p>` : ''}
<p style="color:#4a5563">${facts.map(esc).join('<br>')}</p>${tableHtml}
${button(c.link, 'Open the Review screen')}<p style="color:#4a5563">If the button does not work, copy this address: ${esc(c.link)}</p>${schedule ? `<p style="color:#4a5563;font-size:12px">${esc(schedule)}</p>` : ''}`
	);
	return { subject, text, html };
}

async function renderReview(raw: Record<string, unknown>): Promise<RenderedMail | null> {
	const p = raw as unknown as ReviewMailPayload;
	const state = await loadState(p, p.reminderNo > 0);
	if (!state) return null;
	const settings = await reviewMailSettings();
	const escalated = p.reminderNo > settings.escalateAfterReminders;
	const reviewerEmail = state.reviewer.email.toLowerCase();
	const cc = escalated ? [...new Set((await usersWithRole('lead')).map((u) => u.email.toLowerCase()))].filter((e) => e !== reviewerEmail) : [];
	const testDate = state.protocol.test_date instanceof Date ? state.protocol.test_date.toISOString().slice(0, 10) : String(state.protocol.test_date);
	const body = reviewMailBody({
		reminderNo: p.reminderNo,
		code: state.protocol.code,
		link: `${config.origin}/protocols/${p.protocolId}/review`,
		reviewerName: state.reviewer.name,
		battery: state.protocol.battery,
		testDate,
		discrepancies: state.open,
		escalated,
		intervalMinutes: settings.reminderIntervalMinutes,
		detail: settings.detail,
		round: p.round,
		why: p.reminderNo === 0 ? p.why : undefined
	});
	return { to: [state.reviewer.email], cc, ...body, protocolId: p.protocolId, reminderNo: p.reminderNo };
}

/** After a review message went out (or may have: a worker killed mid-send), schedule the next reminder. */
async function scheduleNext(job: MailJob, result: DeliveryResult): Promise<void> {
	if (result === 'skipped') return;
	const p = job.payload as unknown as ReviewMailPayload;
	if (!(await loadState(p, true))) return; // resolved, reassigned, signed off: the chain ends
	const settings = await reviewMailSettings();
	const next: ReviewMailPayload = {
		protocolId: p.protocolId,
		round: p.round,
		reviewerId: p.reviewerId,
		chain: p.chain,
		reminderNo: p.reminderNo + 1,
		notBefore: Date.now() + Math.round(settings.reminderIntervalMinutes * 60_000)
	};
	await enqueueMail('review_reminder', reviewMailKey(p.chain, next.reminderNo), { ...next });
}

renderers.review_first = renderReview;
renderers.review_reminder = renderReview;
afterDelivery.review_first = scheduleNext;
afterDelivery.review_reminder = scheduleNext;

// ---------------------------------------------------------------------------------------------
// Recovery: Redis here keeps no data across a restart, so a delayed reminder job can be lost.

/**
 * Re-dispatch review outbox rows that were handed to the queue but never delivered and are well
 * past due (their job was lost with a Redis restart). Re-adding a job that still exists is a no-op
 * in BullMQ (job id = idempotency key) and mail_log keeps any message to one send, so this is
 * safe to run from any number of workers. Returns the number of rows handed back.
 */
export async function recoverLostReviewMail(graceMs = 60_000): Promise<number> {
	const rows = await select<{ id: number; payload: unknown; dispatched_at: Date }>(
		`SELECT o.id, o.payload, o.dispatched_at FROM outbox o
		 LEFT JOIN mail_log m ON m.idempotency_key = o.idempotency_key
		 WHERE o.kind IN ('review_first','review_reminder') AND o.dispatched_at IS NOT NULL
		   AND o.dispatched_at < :before AND o.attempts < 6 AND m.id IS NULL
		 ORDER BY o.id LIMIT 500`,
		{ before: new Date(Date.now() - graceMs) }
	);
	const due = rows.filter((r) => {
		const nb = json<{ notBefore?: number }>(r.payload).notBefore;
		return typeof nb !== 'number' || nb < Date.now() - graceMs;
	});
	if (due.length === 0) return 0;
	// Rows whose chain has ended would only be skipped again: leave them.
	const live: number[] = [];
	for (const r of due) {
		const p = json<ReviewMailPayload>(r.payload);
		if (await loadState(p, p.reminderNo > 0)) live.push(r.id);
	}
	if (live.length) await exec(`UPDATE outbox SET dispatched_at = NULL WHERE id IN (:ids)`, { ids: live });
	return live.length;
}

// ---------------------------------------------------------------------------------------------
// For the protocol page

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

/** The messages sent for a protocol, oldest first, from mail_log. */
export async function listProtocolMail(protocolId: number): Promise<ProtocolMailEntry[]> {
	const rows = await select<{
		id: number;
		idempotency_key: string;
		kind: string;
		reminder_no: number | null;
		recipients: string;
		subject: string;
		status: 'claimed' | 'sending' | 'sent' | 'uncertain';
		created_at: Date;
		sent_at: Date | null;
	}>(
		`SELECT id, idempotency_key, kind, reminder_no, recipients, subject, status, created_at, sent_at
		 FROM mail_log WHERE protocol_id = :id ORDER BY id`,
		{ id: protocolId }
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
		const label = r.kind === 'review_first' ? 'First e-mail' : r.kind === 'review_reminder' ? `Reminder ${n}${cc.length ? ' (leads copied in)' : ''}` : r.kind;
		const stale = r.status === 'sending' && Date.now() - new Date(r.created_at).getTime() > 60_000;
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

/** The next reminder scheduled for a protocol's current chain, if any (for "next reminder at …"). */
export async function nextReviewReminder(protocolId: number): Promise<{ reminderNo: number; due: Date; reviewerId: number } | null> {
	const p = await selectOne<{ round: number; status: string }>('SELECT round, status FROM protocols WHERE id = :id', { id: protocolId });
	if (!p || p.status !== 'in_review') return null;
	const chain = await currentChain(protocolId, p.round);
	if (!chain) return null;
	const row = await selectOne<{ idempotency_key: string; payload: unknown }>(
		`SELECT o.idempotency_key, o.payload FROM outbox o LEFT JOIN mail_log m ON m.idempotency_key = o.idempotency_key
		 WHERE o.idempotency_key LIKE :prefix AND o.kind = 'review_reminder' AND m.id IS NULL ORDER BY o.id DESC LIMIT 1`,
		{ prefix: `${chain}:%` }
	);
	if (!row) return null;
	const payload = json<ReviewMailPayload>(row.payload);
	if (payload.chain !== chain) return null;
	if (!(await loadState(payload, true))) return null; // resolved or reassigned: it will send nothing
	return { reminderNo: payload.reminderNo, due: new Date(payload.notBefore ?? Date.now()), reviewerId: payload.reviewerId };
}
