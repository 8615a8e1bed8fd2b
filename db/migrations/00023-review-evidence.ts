import type { Migration } from '../migrate-types';

/**
 * Review that follows the evidence (issue 13):
 * - discrepancies.alternative: the reference from the other pass's raw score (reconcile.md rule 5);
 * - discrepancies.settled_by / settled_by_id: a derived discrepancy closed by its test's raw decision
 *   (the raw discrepancy's id) or by an amendment, instead of by a reviewer's own choice;
 * - discrepancies.carried_from: the earlier round's row whose decision stands (amendments);
 * - error_events.judgement: the charge rests on the reviewer's judgement (the kept value contradicts
 *   the recomputation; the note says why);
 * - amendments: one corrected field of a verified protocol, with its reason, requested by a reviewer
 *   or made by a lead, approved by a lead; before and after.
 */
export const up: Migration = async ({ context: q }) => {
	const statements = [
		`ALTER TABLE discrepancies
			ADD COLUMN alternative VARCHAR(40) NULL AFTER expected,
			ADD COLUMN settled_by ENUM('raw_decision','amendment') NULL,
			ADD COLUMN settled_by_id INT UNSIGNED NULL,
			ADD COLUMN carried_from INT UNSIGNED NULL`,
		`ALTER TABLE error_events ADD COLUMN judgement TINYINT(1) NOT NULL DEFAULT 0`,
		`CREATE TABLE amendments (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			protocol_id INT UNSIGNED NOT NULL,
			from_round INT UNSIGNED NOT NULL,
			round INT UNSIGNED NULL,
			test_code VARCHAR(40) NOT NULL,
			field ENUM('raw','z','standard','scaled','t','percentile') NOT NULL,
			old_value VARCHAR(40) NULL,
			new_value VARCHAR(40) NOT NULL,
			reason TEXT NOT NULL,
			status ENUM('requested','applied','refused') NOT NULL,
			requested_by INT UNSIGNED NOT NULL,
			requested_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			decided_by INT UNSIGNED NULL,
			decided_at DATETIME(3) NULL,
			decision_note TEXT NULL,
			KEY amendments_protocol (protocol_id, status),
			CONSTRAINT amendments_protocol_fk FOREIGN KEY (protocol_id) REFERENCES protocols(id) ON DELETE CASCADE,
			CONSTRAINT amendments_requested_fk FOREIGN KEY (requested_by) REFERENCES users(id),
			CONSTRAINT amendments_decided_fk FOREIGN KEY (decided_by) REFERENCES users(id)
		)`
	];
	for (const s of statements) await q.sequelize.query(s);
};

export const down: Migration = async ({ context: q }) => {
	await q.sequelize.query('DROP TABLE IF EXISTS amendments');
	await q.sequelize.query('ALTER TABLE error_events DROP COLUMN judgement');
	await q.sequelize.query('ALTER TABLE discrepancies DROP COLUMN carried_from, DROP COLUMN settled_by_id, DROP COLUMN settled_by, DROP COLUMN alternative');
};
