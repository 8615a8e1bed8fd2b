import type { Migration } from '../migrate-types';

/**
 * Summary tables for the Audit screen, maintained by src/lib/server/audit-stats/record.ts inside
 * the workflow's own transactions (never rebuilt by a batch job):
 *
 *   audit_fields     one row per submitted pass × test: how many fields the scorer entered there
 *                    (raw and derived), the denominators of the per-test/domain/field rates.
 *   agreement_pairs  one row per protocol round × test × field that at least one pass entered: both
 *                    entries as numbers, and for labelled fields both descriptive bands (AACN 2020
 *                    band ids), so agreement statistics are GROUP BYs over one narrow table.
 *
 * Plus covering indexes on error_events for date-range scans.
 */
export const up: Migration = async ({ context: q }) => {
	const statements = [
		`CREATE TABLE audit_fields (
			pass_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			protocol_id INT UNSIGNED NOT NULL,
			round INT UNSIGNED NOT NULL,
			which ENUM('first','second') NOT NULL,
			scorer_id INT UNSIGNED NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			domain VARCHAR(40) NOT NULL,
			raw_fields TINYINT UNSIGNED NOT NULL,
			derived_fields TINYINT UNSIGNED NOT NULL,
			entered_at DATETIME(3) NOT NULL,
			PRIMARY KEY (pass_id, test_code),
			KEY audit_fields_protocol (protocol_id, round),
			KEY audit_fields_time (entered_at, scorer_id, battery_id, test_code, domain, raw_fields, derived_fields),
			KEY audit_fields_scorer (scorer_id, entered_at, battery_id, test_code, domain, raw_fields, derived_fields),
			KEY audit_fields_test (test_code, entered_at, scorer_id, battery_id, domain, raw_fields, derived_fields)
		)`,
		`CREATE TABLE agreement_pairs (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			protocol_id INT UNSIGNED NOT NULL,
			round INT UNSIGNED NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			domain VARCHAR(40) NOT NULL,
			field ENUM('raw','z','standard','scaled','t','percentile') NOT NULL,
			first_scorer_id INT UNSIGNED NOT NULL,
			second_scorer_id INT UNSIGNED NOT NULL,
			first_value DOUBLE NULL,
			second_value DOUBLE NULL,
			first_label VARCHAR(30) NULL,
			second_label VARCHAR(30) NULL,
			entered_at DATETIME(3) NOT NULL,
			UNIQUE KEY agreement_pairs_one (protocol_id, round, test_code, field),
			KEY agreement_pairs_field (field, entered_at, battery_id, test_code, first_scorer_id, second_scorer_id, first_value, second_value, first_label, second_label),
			KEY agreement_pairs_test (test_code, field, entered_at, battery_id, first_scorer_id, second_scorer_id, first_value, second_value, first_label, second_label),
			KEY agreement_pairs_first (first_scorer_id, field, entered_at),
			KEY agreement_pairs_second (second_scorer_id, field, entered_at)
		)`,
		`CREATE INDEX error_events_time ON error_events (entered_at, scorer_id, battery_id, test_code, kind, field, domain)`,
		`CREATE INDEX error_events_scorer_cover ON error_events (scorer_id, entered_at, battery_id, test_code, kind, field, domain)`,
		`CREATE INDEX error_events_protocol ON error_events (protocol_id)`,
		// open discrepancies not yet attributed, counted beside the error rates
		`CREATE INDEX discrepancies_unresolved ON discrepancies (resolved_at, kind, test_code)`
	];
	for (const s of statements) await q.sequelize.query(s);
};

export const down: Migration = async ({ context: q }) => {
	await q.sequelize.query('DROP INDEX discrepancies_unresolved ON discrepancies');
	await q.sequelize.query('DROP INDEX error_events_protocol ON error_events');
	await q.sequelize.query('DROP INDEX error_events_scorer_cover ON error_events');
	await q.sequelize.query('DROP INDEX error_events_time ON error_events');
	for (const t of ['agreement_pairs', 'audit_fields']) await q.sequelize.query(`DROP TABLE IF EXISTS ${t}`);
};
