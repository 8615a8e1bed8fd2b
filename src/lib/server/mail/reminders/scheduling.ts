/**
 * Review notifications: the first e-mail when a protocol reaches `in_review`, a reminder every
 * interval while discrepancies stay open, and escalation (leads copied in) after N reminders.
 *
 * How a chain of messages works
 * - The reconciliation transaction calls `notifyReviewStarted`, which writes the outbox row of
 *   message 0 (the first e-mail). The worker's dispatcher moves it into BullMQ; `deliver` sends it
 *   at most once per idempotency key.
 * - After a review message was sent (or possibly sent: a worker killed mid-send), `scheduleNext`
 *   (registered by ./delivery.ts as the `afterDelivery` hook) writes the outbox row of the next
 *   reminder with `notBefore` = now + interval; the dispatcher turns it into a delayed job. Writing
 *   it is idempotent (unique key).
 * - Every message re-checks the database when it is rendered (`loadState`): the protocol is still
 *   `in_review`, in the same round, with the same reviewer, and this chain is still the current one
 *   (./keys.ts); reminders also need at least one open discrepancy. Otherwise nothing is sent and
 *   nothing is scheduled: the chain ends.
 *
 * This module does not import the renderer (.svelte): the services, seeds and scripts that write
 * review mail run under tsx without the Svelte hook.
 */
import { Op, fn } from 'sequelize';
import { select, selectOne, type Tx } from '../../db';
import { models } from '../../models';
import type { Outbox } from '../../models/mail';
import { enqueueMail, enqueueMails } from '../outbox';
import { autocommit as write, readRetried as read } from '../../db';
import type { DeliveryResult, MailJob } from '../deliver';
import type { ProtocolRow } from '../../models/protocol';
import type { MailDiscrepancy } from './render';
import { reviewMailSettings, type ReviewMailSettings } from './settings';
import { chainOf, chainOfKey, reviewMailKey, roundPrefix, type ReviewMailPayload } from './keys';

/** The chain whose first e-mail was written last for this protocol round (the current one). */
async function currentChain(protocolId: number, round: number, t?: Tx): Promise<string | null> {
	// raw: read twice for every review e-mail (render and scheduling), where the model's overhead shows
	const row = await selectOne<Pick<Outbox, 'idempotency_key'>>(
		`SELECT idempotency_key FROM outbox WHERE idempotency_key LIKE :prefix AND kind = 'review_first' ORDER BY id DESC LIMIT 1`,
		{ prefix: `${roundPrefix(protocolId, round)}%` },
		t
	);
	return row ? chainOfKey(row.idempotency_key) : null;
}

// ---------------------------------------------------------------------------------------------
// The contract with the workflow

/**
 * Inside the reconciliation transaction, when a protocol reaches `in_review`: the outbox row of the
 * reviewer's first e-mail. Calling it again for the same protocol, round and reviewer is a no-op.
 */
export async function notifyReviewStarted(protocolId: number, round: number, reviewerId: number, t: Tx, why?: ReviewMailPayload['why']): Promise<void> {
	const m = reviewStartedMail(protocolId, round, reviewerId, why);
	await enqueueMail(m.kind, m.key, m.payload, t);
}

/** The outbox row `notifyReviewStarted` writes (the second submit sends it with `outboxInsert` in its last batch). */
export function reviewStartedMail(protocolId: number, round: number, reviewerId: number, why?: ReviewMailPayload['why']) {
	const chain = chainOf(protocolId, round, reviewerId);
	const payload: ReviewMailPayload = { protocolId, round, reviewerId, chain, reminderNo: 0, ...(why ? { why } : {}) };
	return { kind: 'review_first' as const, key: reviewMailKey(chain, 0), payload: { ...payload } };
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
	const earlier = await models().Outbox.findAll({
		attributes: ['idempotency_key'],
		where: { idempotency_key: { [Op.like]: `${mine}%` }, kind: 'review_first' },
		transaction: t ?? undefined
	});
	const generation = earlier.filter((r) => r.idempotency_key === `${mine}:0` || r.idempotency_key.startsWith(`${mine}.`)).length + 1;
	const chain = chainOf(protocolId, round, newReviewerId, generation);
	const payload: ReviewMailPayload = { protocolId, round, reviewerId: newReviewerId, chain, reminderNo: 0 };
	await enqueueMail('review_first', reviewMailKey(chain, 0), { ...payload }, t);
}

// ---------------------------------------------------------------------------------------------
// The state a message depends on

/** The protocol columns a message needs (a `protocols` row with its examinee's code and battery's name). */
export type MailProtocol = Pick<ProtocolRow, 'id' | 'status' | 'round' | 'reviewer_id' | 'status_changed_at'> & {
	test_date: string | Date;
	code: string;
	battery: string | null;
};

export interface ReviewState {
	protocol: MailProtocol;
	open: MailDiscrepancy[];
	reviewer: { email: string; name: string; active: number };
}

/** The state a message depends on, or null when the chain has ended. */
export async function loadState(p: ReviewMailPayload, needOpen: boolean): Promise<ReviewState | null> {
	// one statement for the protocol, its examinee's code, battery, assigned reviewer and current chain (every
	// review e-mail reads it: round trips are its cost); protocols and discrepancies have no models yet
	const row = await selectOne<MailProtocol & { chain_key: string | null; reviewer_email: string | null; reviewer_name: string; reviewer_active: number }>(
		`SELECT p.id, p.status, p.round, p.reviewer_id, p.status_changed_at, e.code, p.test_date, b.name AS battery,
		        u.email AS reviewer_email, u.name AS reviewer_name, u.active AS reviewer_active,
		        (SELECT o.idempotency_key FROM outbox o WHERE o.idempotency_key LIKE :prefix AND o.kind = 'review_first' ORDER BY o.id DESC LIMIT 1) AS chain_key
		 FROM protocols p JOIN examinees e ON e.id = p.examinee_id LEFT JOIN batteries b ON b.id = p.battery_id
		      LEFT JOIN users u ON u.id = :reviewerId
		 WHERE p.id = :id`,
		{ id: p.protocolId, reviewerId: p.reviewerId, prefix: `${roundPrefix(p.protocolId, p.round)}%` }
	);
	if (!row || row.status !== 'in_review' || row.round !== p.round || row.reviewer_id !== p.reviewerId) return null;
	if ((row.chain_key ? chainOfKey(row.chain_key) : null) !== p.chain) return null;
	const { chain_key: _chain, reviewer_email, reviewer_name, reviewer_active, ...protocol } = row;
	const open = await select<MailDiscrepancy>(
		`SELECT d.test_code, d.field, d.pass, d.kind, d.value, d.other, d.expected, d.out_of_range,
		        (SELECT t.name FROM protocol_tests pt JOIN tests t ON t.id = pt.test_id
		          WHERE pt.protocol_id = d.protocol_id AND t.code = d.test_code LIMIT 1) AS test_name
		 FROM discrepancies d
		 WHERE d.protocol_id = :id AND d.round = :round AND d.resolved_at IS NULL
		 ORDER BY d.position`,
		{ id: p.protocolId, round: p.round }
	);
	if (needOpen && open.length === 0) return null;
	if (reviewer_email === null || !reviewer_active) return null;
	return { protocol, open, reviewer: { email: reviewer_email, name: reviewer_name, active: reviewer_active } };
}

/**
 * `loadState` for the messages of a batch (../deliver.ts deliverBatch), in three statements whatever their
 * number: the protocols with their examinee's code, battery and assigned reviewer; the current chain of
 * each protocol round (the last first e-mail written for it); the open discrepancies. The same checks as
 * `loadState`, message by message; null where the chain has ended.
 */
export async function loadStates(ps: ReviewMailPayload[]): Promise<(ReviewState | null)[]> {
	if (ps.length === 0) return [];
	const ids = [...new Set(ps.map((p) => p.protocolId))];
	type Row = MailProtocol & { reviewer_email: string | null; reviewer_name: string; reviewer_active: number };
	const rows = await select<Row>(
		`SELECT p.id, p.status, p.round, p.reviewer_id, p.status_changed_at, e.code, p.test_date, b.name AS battery,
		        u.email AS reviewer_email, u.name AS reviewer_name, u.active AS reviewer_active
		 FROM protocols p JOIN examinees e ON e.id = p.examinee_id LEFT JOIN batteries b ON b.id = p.battery_id
		      LEFT JOIN users u ON u.id = p.reviewer_id
		 WHERE p.id IN (:ids)`,
		{ ids }
	);
	const byId = new Map(rows.map((r) => [r.id, r]));
	// the checks that need no more reading first: only the messages still alive are read further
	const live = ps.filter((p) => {
		const r = byId.get(p.protocolId);
		return r && r.status === 'in_review' && r.round === p.round && r.reviewer_id === p.reviewerId && r.reviewer_email !== null && r.reviewer_active;
	});
	if (live.length === 0) return ps.map(() => null);
	// the current chain per protocol round: one LIKE per prefix (each an index range on the unique key)
	const prefixes = [...new Set(live.map((p) => roundPrefix(p.protocolId, p.round)))];
	const firsts = await select<{ idempotency_key: string }>(
		`SELECT idempotency_key FROM outbox WHERE kind = 'review_first' AND (${prefixes.map((_, i) => `idempotency_key LIKE :x${i}`).join(' OR ')}) ORDER BY id`,
		Object.fromEntries(prefixes.map((x, i) => [`x${i}`, `${x}%`]))
	);
	const chainOfRound = new Map<string, string>();
	for (const f of firsts) {
		const prefix = prefixes.find((x) => f.idempotency_key.startsWith(x));
		if (prefix) chainOfRound.set(prefix, chainOfKey(f.idempotency_key)); // ordered by id: the last one wins
	}
	const open = await select<MailDiscrepancy & { protocol_id: number; round: number }>(
		`SELECT d.protocol_id, d.round, d.test_code, d.field, d.pass, d.kind, d.value, d.other, d.expected, d.out_of_range,
		        (SELECT t.name FROM protocol_tests pt JOIN tests t ON t.id = pt.test_id
		          WHERE pt.protocol_id = d.protocol_id AND t.code = d.test_code LIMIT 1) AS test_name
		 FROM discrepancies d
		 WHERE d.protocol_id IN (:ids) AND d.resolved_at IS NULL
		 ORDER BY d.protocol_id, d.position`,
		{ ids: [...new Set(live.map((p) => p.protocolId))] }
	);
	const openOf = new Map<string, MailDiscrepancy[]>();
	for (const { protocol_id, round, ...d } of open) {
		const k = `${protocol_id}:${round}`;
		if (!openOf.has(k)) openOf.set(k, []);
		openOf.get(k)!.push(d);
	}
	const alive = new Set(live);
	return ps.map((p) => {
		if (!alive.has(p) || chainOfRound.get(roundPrefix(p.protocolId, p.round)) !== p.chain) return null;
		const list = openOf.get(`${p.protocolId}:${p.round}`) ?? [];
		if (p.reminderNo > 0 && list.length === 0) return null;
		const { reviewer_email, reviewer_name, reviewer_active, ...protocol } = byId.get(p.protocolId)!;
		// each message its own copies: a renderer or hook may not see another message's list
		return { protocol: { ...protocol }, open: list.map((d) => ({ ...d })), reviewer: { email: reviewer_email!, name: reviewer_name, active: reviewer_active } };
	});
}

// ---------------------------------------------------------------------------------------------
// The next reminder

/**
 * What the renderer read for a message it rendered (./delivery.ts): scheduling right after that send uses it
 * instead of reading it again. A discrepancy resolved in between at worst schedules a reminder that then
 * finds nothing open when it is due, renders nothing and ends the chain (every reminder re-checks).
 */
export interface RenderedReviewState {
	state: ReviewState;
	settings: ReviewMailSettings;
}

type ReminderRow = { kind: 'review_reminder'; key: string; payload: Record<string, unknown> };

/** The outbox row of the reminder after message `p` of its chain, due one reminder interval after `now`. */
function nextReminder(p: ReviewMailPayload, settings: ReviewMailSettings, now: number): ReminderRow {
	const next: ReviewMailPayload = {
		protocolId: p.protocolId,
		round: p.round,
		reviewerId: p.reviewerId,
		chain: p.chain,
		reminderNo: p.reminderNo + 1,
		notBefore: now + Math.round(settings.reminderIntervalMinutes * 60_000)
	};
	return { kind: 'review_reminder', key: reviewMailKey(p.chain, next.reminderNo), payload: { ...next } };
}

/** After a review message went out (or may have: a worker killed mid-send), schedule the next reminder. */
export async function scheduleNext(job: MailJob, result: DeliveryResult, now = Date.now(), rendered?: RenderedReviewState): Promise<void> {
	if (result === 'skipped') return;
	const p = job.payload as unknown as ReviewMailPayload;
	if (rendered ? rendered.state.open.length === 0 : !(await loadState(p, true))) return; // resolved, reassigned, signed off: the chain ends
	const next = nextReminder(p, rendered?.settings ?? (await reviewMailSettings()), now);
	await enqueueMail(next.kind, next.key, next.payload);
}

/** `scheduleNext` for the review messages a batch sent, with what their renders read: one INSERT for all. */
export async function scheduleNextMany(sent: { job: MailJob; context?: unknown }[], now = Date.now()): Promise<void> {
	const rows: ReminderRow[] = [];
	for (const { job, context } of sent) {
		const rendered = context as RenderedReviewState | undefined;
		if (!rendered) {
			await scheduleNext(job, 'sent', now); // not rendered here (never in a batch): read again
			continue;
		}
		if (rendered.state.open.length === 0) continue; // nothing open: the chain ends
		rows.push(nextReminder(job.payload as unknown as ReviewMailPayload, rendered.settings, now));
	}
	await enqueueMails(rows);
}

/** The next reminder scheduled for a protocol's current chain, if any (for "next reminder at …"). */
export async function nextReviewReminder(protocolId: number): Promise<{ reminderNo: number; due: Date; reviewerId: number } | null> {
	const p = await selectOne<Pick<ProtocolRow, 'round' | 'status'>>('SELECT round, status FROM protocols WHERE id = :id', { id: protocolId });
	if (!p || p.status !== 'in_review') return null;
	const chain = await currentChain(protocolId, p.round);
	if (!chain) return null;
	const { Outbox, MailLog } = models();
	// not yet logged: the outbox row without a mail_log row (LEFT JOIN … IS NULL through the association)
	const row = await read(() =>
		Outbox.findOne({
			attributes: ['idempotency_key', 'payload'],
			where: { idempotency_key: { [Op.like]: `${chain}:%` }, kind: 'review_reminder', '$log.id$': null },
			include: [{ model: MailLog, as: 'log', attributes: [], required: false }],
			order: [['id', 'DESC']],
			subQuery: false
		})
	);
	if (!row) return null;
	const payload = row.payload as unknown as ReviewMailPayload;
	if (payload.chain !== chain) return null;
	if (!(await loadState(payload, true))) return null; // resolved or reassigned: it will send nothing
	return { reminderNo: payload.reminderNo, due: new Date(payload.notBefore ?? Date.now()), reviewerId: payload.reviewerId };
}

// ---------------------------------------------------------------------------------------------
// Recovery: Redis here keeps no data across a restart, so a delayed reminder job can be lost.

/**
 * Re-dispatch review outbox rows that were handed to the queue but never delivered and are well
 * past due (their job was lost with a Redis restart). Re-adding a job that still exists is a no-op
 * in BullMQ (job id = idempotency key) and mail_log keeps any message to one send, so this is
 * safe to run from any number of workers. `queued` names the keys whose job the queue still holds
 * (../recover.ts asks Redis); those are left alone. Returns the number of rows handed back.
 */
export async function recoverLostReviewMail(
	graceMs = 60_000,
	now = Date.now(),
	queued: (keys: string[]) => Promise<Set<string>> = async () => new Set()
): Promise<number> {
	const { Outbox, MailLog } = models();
	const rows = await read(() =>
		Outbox.findAll({
			attributes: ['id', 'idempotency_key', 'payload'],
			where: {
				kind: ['review_first', 'review_reminder'],
				dispatched_at: { [Op.ne]: null, [Op.lt]: new Date(now - graceMs) },
				attempts: { [Op.lt]: 6 },
				skipped_at: null,
				'$log.id$': null
			},
			include: [{ model: MailLog, as: 'log', attributes: [], required: false }],
			order: [['id', 'ASC']],
			limit: 500,
			subQuery: false
		})
	);
	// a row whose job is still in the queue (waiting behind a backlog, or failed for good) is BullMQ's: adding
	// it again would be a no-op, and reading its state first would cost the backlog its time
	const inQueue = await queued(rows.map((r) => r.idempotency_key));
	const due = rows.filter((r) => {
		const nb = (r.payload as { notBefore?: number }).notBefore;
		return !inQueue.has(r.idempotency_key) && (typeof nb !== 'number' || nb < now - graceMs);
	});
	if (due.length === 0) return 0;
	// Rows whose chain has ended would only be skipped again: marked so, as a delivery marks those it
	// skips (../outbox.ts markSkipped), so that no later sweep reads them again. Left unmarked they filled
	// the 500 rows read each round for good (a reminder skipped after a resolution is common), and a
	// message really lost behind them was never handed back.
	const live: number[] = [];
	const ended: number[] = [];
	for (const r of due) {
		const p = r.payload as unknown as ReviewMailPayload;
		if (await loadState(p, p.reminderNo > 0)) live.push(r.id);
		else ended.push(r.id);
	}
	if (live.length) await write(() => Outbox.update({ dispatched_at: null }, { where: { id: live } }));
	if (ended.length) await write(() => Outbox.update({ skipped_at: fn('CURRENT_TIMESTAMP', 3) }, { where: { id: ended, skipped_at: null } }));
	return live.length;
}
