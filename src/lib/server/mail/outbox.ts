/**
 * The transactional outbox. A business transaction (reconciliation, invitation) writes a row here in
 * the same database transaction; the worker's dispatcher moves rows into the BullMQ queue. If Redis
 * is down, rows wait here and nothing is lost. The idempotency key is unique: writing the same
 * message twice (a retried request) is a no-op.
 */
import { exec, select, type Tx } from '../db';

export type MailKind = 'invite' | 'reset' | 'review_first' | 'review_reminder' | 'verification_full';

export interface OutboxRow {
	id: number;
	kind: MailKind;
	idempotency_key: string;
	payload: unknown;
	created_at: Date;
}

export async function enqueueMail(kind: MailKind, idempotencyKey: string, payload: Record<string, unknown>, t?: Tx): Promise<void> {
	await exec(
		`INSERT IGNORE INTO outbox (kind, idempotency_key, payload) VALUES (:kind, :key, :payload)`,
		{ kind, key: idempotencyKey, payload: JSON.stringify(payload) },
		t
	);
}

export async function pendingOutbox(limit = 200): Promise<OutboxRow[]> {
	return select<OutboxRow>(`SELECT id, kind, idempotency_key, payload, created_at FROM outbox WHERE dispatched_at IS NULL ORDER BY id LIMIT :limit`, { limit });
}

export async function markDispatched(ids: number[]): Promise<void> {
	if (ids.length === 0) return;
	await exec(`UPDATE outbox SET dispatched_at = CURRENT_TIMESTAMP(3), attempts = attempts + 1 WHERE id IN (:ids)`, { ids });
}

export async function markDispatchFailed(ids: number[], message: string): Promise<void> {
	if (ids.length === 0) return;
	await exec(`UPDATE outbox SET attempts = attempts + 1, last_error = :message WHERE id IN (:ids)`, { ids, message: message.slice(0, 500) });
}
