import type { Migration } from '../migrate-types';

/**
 * E-mail that is never lost (issue 12, item 17). mail_log gets the phases of a send: 'claimed'
 * (rendered, not yet handed to SMTP: safe to retry once its lease ends), 'sending' (handed to
 * SMTP), 'sent', 'uncertain' (handed to SMTP and never confirmed: the worker died; not sent again,
 * shown as such) and the time the SMTP hand-over started. outbox gets `failed_at`: a message whose
 * every retry was refused is marked failed, visibly, instead of vanishing.
 */
export const up: Migration = async ({ context: q }) => {
	await q.sequelize.query(
		`ALTER TABLE mail_log
		   MODIFY status ENUM('claimed','sending','sent','uncertain') NOT NULL DEFAULT 'claimed',
		   ADD COLUMN sending_at DATETIME(3) NULL AFTER created_at`
	);
	await q.sequelize.query(`ALTER TABLE outbox ADD COLUMN failed_at DATETIME(3) NULL AFTER dispatched_at`);
};

export const down: Migration = async ({ context: q }) => {
	await q.sequelize.query(`ALTER TABLE outbox DROP COLUMN failed_at`);
	await q.sequelize.query(`UPDATE mail_log SET status = 'sending' WHERE status IN ('claimed','uncertain')`);
	await q.sequelize.query(`ALTER TABLE mail_log DROP COLUMN sending_at, MODIFY status ENUM('sending','sent') NOT NULL DEFAULT 'sending'`);
};
