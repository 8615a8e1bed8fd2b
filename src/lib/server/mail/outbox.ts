/**
 * The transactional outbox. A business transaction (reconciliation, invitation) writes a row here in
 * the same database transaction; the worker's dispatcher moves rows into the BullMQ queue. If Redis
 * is down, rows wait here and nothing is lost. The idempotency key is unique: writing the same
 * message twice (a retried request) is a no-op. A write that added a row wakes the dispatcher once it
 * has committed (./wake.ts).
 */
import { fn, literal } from 'sequelize';
import { afterCommit, autocommit as write, exec, readRetried as read, GUARDED, type Piped, type Tx } from '../db';
import { models } from '../models';
import { MAIL_KINDS, type MailKind, type Outbox } from '../models/mail';
import { wakeDispatcher } from './wake';

export type { MailKind } from '../models/mail';

export async function enqueueMail(kind: MailKind, idempotencyKey: string, payload: Record<string, unknown>, t?: Tx): Promise<void> {
	const s = outboxInsert(kind, idempotencyKey, payload, Boolean(t));
	const { affected } = await exec(s.sql, s.values, t);
	outboxWritten(t, affected);
}

/**
 * An `outboxInsert` has answered with `affected` rows (0: the key was there already): when it added
 * the row, the dispatcher goes at once rather than at its next poll (./wake.ts) — after COMMIT, never
 * inside. The second submit calls it with its pipeline's answer.
 */
export function outboxWritten(t: Tx, affected: number): void {
	if (affected > 0) afterCommit(t, wakeDispatcher);
}

/**
 * The outbox row as one statement (`enqueueMail` runs it; the second submit sends it in its last
 * `pipeline`). Raw: every business transaction that mails and every review e-mail sent writes one,
 * and the model's build and validation cost CPU there. The unique key makes a second write a no-op
 * (`ON DUPLICATE KEY UPDATE id = id`). `guarded` (inside a transaction; ../db, IN_TX): `kind` is
 * NULL outside it and the statement fails without a row. Not `INSERT IGNORE`: IGNORE would turn that
 * NULL into '' and insert the row anyway.
 */
export function outboxInsert(kind: MailKind, idempotencyKey: string, payload: Record<string, unknown>, guarded = true): Piped {
	if (!MAIL_KINDS.includes(kind)) throw new Error(`unknown mail kind ${kind}`);
	return {
		sql: `INSERT INTO outbox (kind, idempotency_key, payload) VALUES (${guarded ? GUARDED : '?'}, ?, ?) ON DUPLICATE KEY UPDATE id = id`,
		values: [kind, idempotencyKey, JSON.stringify(payload)]
	};
}

/** Many outbox rows in one INSERT IGNORE (a batch's next reminders; outside any transaction). */
export async function enqueueMails(rows: { kind: MailKind; key: string; payload: Record<string, unknown> }[]): Promise<void> {
	if (rows.length === 0) return;
	for (const r of rows) if (!MAIL_KINDS.includes(r.kind)) throw new Error(`unknown mail kind ${r.kind}`);
	const { affected } = await exec(`INSERT IGNORE INTO outbox (kind, idempotency_key, payload) VALUES :rows`, {
		rows: rows.map((r) => [r.kind, r.key, JSON.stringify(r.payload)])
	});
	if (affected > 0) wakeDispatcher();
}

/** Rows the dispatcher has not handed to the queue yet, oldest first. */
export async function pendingOutbox(limit = 200): Promise<Pick<Outbox, 'id' | 'kind' | 'idempotency_key' | 'payload' | 'created_at'>[]> {
	return read(() =>
		models().Outbox.findAll({
			attributes: ['id', 'kind', 'idempotency_key', 'payload', 'created_at'],
			where: { dispatched_at: null },
			order: [['id', 'ASC']],
			limit
		})
	);
}

export async function markDispatched(ids: number[]): Promise<void> {
	if (ids.length === 0) return;
	await write(() => models().Outbox.update({ dispatched_at: fn('CURRENT_TIMESTAMP', 3), attempts: literal('attempts + 1') }, { where: { id: ids } }));
}

/**
 * Rows whose delivery found nothing to send and gave up for good (a review e-mail whose review had ended):
 * marked so the mail sweep (./recover.ts) no longer takes them for lost messages.
 */
export async function markSkipped(keys: string[]): Promise<void> {
	if (keys.length === 0) return;
	await write(() => models().Outbox.update({ skipped_at: fn('CURRENT_TIMESTAMP', 3) }, { where: { idempotency_key: keys, skipped_at: null } }));
}

export async function markDispatchFailed(ids: number[], message: string): Promise<void> {
	if (ids.length === 0) return;
	await write(() => models().Outbox.update({ attempts: literal('attempts + 1'), last_error: message.slice(0, 500) }, { where: { id: ids } }));
}
