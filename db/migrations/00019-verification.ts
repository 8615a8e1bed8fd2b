import type { Migration } from '../migrate-types';

/**
 * Risk-based verification (issue 19): a battery's second-pass policy, each scorer's standing under
 * it, and what happened at each protocol's first submission (the draw, with the policy in force).
 * Models: src/lib/server/models/verification.ts.
 */
export const up: Migration = async ({ context: q }) => {
	const statements = [
		`CREATE TABLE verification_policies (
			battery_id INT UNSIGNED NOT NULL PRIMARY KEY,
			mode ENUM('every','sampled') NOT NULL DEFAULT 'every',
			min_fields INT UNSIGNED NOT NULL DEFAULT 2000,
			window_days INT UNSIGNED NOT NULL DEFAULT 180,
			threshold_per100 DECIMAL(6,3) NOT NULL DEFAULT 0.500,
			probability DECIMAL(5,4) NOT NULL DEFAULT 0.2500,
			updated_by INT UNSIGNED NULL,
			updated_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			CONSTRAINT verification_policies_battery_fk FOREIGN KEY (battery_id) REFERENCES batteries(id)
		)`,
		`CREATE TABLE verification_scorers (
			scorer_id INT UNSIGNED NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			mode ENUM('full','sampled') NOT NULL,
			since DATETIME(3) NOT NULL,
			reverted_at DATETIME(3) NULL,
			reason VARCHAR(300) NULL,
			PRIMARY KEY (scorer_id, battery_id)
		)`,
		`CREATE TABLE verification_protocols (
			protocol_id INT UNSIGNED NOT NULL PRIMARY KEY,
			required_by INT UNSIGNED NULL,
			required_at DATETIME(3) NULL,
			required_reason VARCHAR(500) NULL,
			outcome ENUM('policy_full','scorer_full','required','drawn','not_drawn') NULL,
			decided_at DATETIME(3) NULL,
			scorer_id INT UNSIGNED NULL,
			battery_id INT UNSIGNED NULL,
			probability DECIMAL(5,4) NULL,
			draw_value INT UNSIGNED NULL,
			raw_fields INT UNSIGNED NULL,
			fields_entered INT UNSIGNED NULL,
			checked_at DATETIME(3) NULL,
			policy LONGTEXT NULL CHECK (policy IS NULL OR JSON_VALID(policy)),
			KEY verification_protocols_scorer (scorer_id, battery_id, outcome, decided_at)
		)`
	];
	for (const s of statements) await q.sequelize.query(s);
};

export const down: Migration = async ({ context: q }) => {
	for (const t of ['verification_protocols', 'verification_scorers', 'verification_policies']) await q.sequelize.query(`DROP TABLE IF EXISTS ${t}`);
};
