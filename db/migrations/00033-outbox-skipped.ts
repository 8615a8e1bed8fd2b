import type { Migration } from '../migrate-types';

/**
 * `outbox.skipped_at`: the delivery found nothing to send (a review e-mail or reminder whose review had
 * ended, e.g. resolved or reassigned before it was due) and gave up for good. Such a row has no
 * mail_log entry, so before this column the mail sweep (src/lib/server/mail/recover.ts) took it for a
 * lost message on every round: it re-read each one's state (two queries a row, about 0.5 s a sweep for
 * 500 rows), and as it reads at most 500 rows oldest first, once 500 such rows had gathered a message
 * really lost after them was never handed back. Rows already there are marked by the sweep itself
 * the first time it finds their review ended (no backfill here: only the current state says so).
 */
export const up: Migration = async ({ context: q }) => {
	await q.sequelize.query(`ALTER TABLE outbox ADD COLUMN skipped_at DATETIME(3) NULL DEFAULT NULL AFTER failed_at`);
};

export const down: Migration = async ({ context: q }) => {
	await q.sequelize.query(`ALTER TABLE outbox DROP COLUMN skipped_at`);
};
