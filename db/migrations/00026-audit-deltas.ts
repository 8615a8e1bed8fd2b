import type { Migration } from '../migrate-types';

/**
 * Append-only delta rows for the audit's daily summaries (issue 18, the second submit). The
 * reconciliation transaction used to add its sums to audit_daily, agreement_daily, agreement_weekly
 * and agreement_pair_daily with INSERT … ON DUPLICATE KEY UPDATE: every submit of a day updated the
 * same few rows (scorer 0, today, the battery's tests) and waited for the other submits' locks until
 * they committed. Now it appends its sums (or, recorded again, the negated old ones) to a `_delta`
 * table of the same shape, whose only key is its own id, so concurrent submits never touch one row;
 * the reports add the delta rows to the summary rows, and the worker folds the deltas into the
 * summaries in the background (src/lib/server/audit-stats/record.ts, `foldDeltas`). The numbers are
 * the same whether a delta row has been folded or not.
 */
const MEASURES = `pairs INT NOT NULL DEFAULT 0,
			one_sided INT NOT NULL DEFAULT 0,
			exact INT NOT NULL DEFAULT 0,
			sx DOUBLE NOT NULL DEFAULT 0, sy DOUBLE NOT NULL DEFAULT 0,
			sxx DOUBLE NOT NULL DEFAULT 0, syy DOUBLE NOT NULL DEFAULT 0, sxy DOUBLE NOT NULL DEFAULT 0,
			sd DOUBLE NOT NULL DEFAULT 0, sdd DOUBLE NOT NULL DEFAULT 0`;
const FIELD = "ENUM('raw','z','standard','scaled','t','percentile','sum') NOT NULL";

export const up: Migration = async ({ context: q }) => {
	const statements = [
		`CREATE TABLE audit_daily_delta (
			id BIGINT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			day DATE NOT NULL,
			scorer_id INT UNSIGNED NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			domain VARCHAR(40) NOT NULL,
			passes INT NOT NULL DEFAULT 0,
			fields_entered INT NOT NULL DEFAULT 0,
			raw_fields INT NOT NULL DEFAULT 0,
			derived_fields INT NOT NULL DEFAULT 0
		)`,
		`CREATE TABLE agreement_daily_delta (
			id BIGINT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			scorer_id INT UNSIGNED NOT NULL,
			day DATE NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			field ${FIELD},
			first_label VARCHAR(30) NOT NULL,
			second_label VARCHAR(30) NOT NULL,
			${MEASURES}
		)`,
		`CREATE TABLE agreement_weekly_delta (
			id BIGINT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			scorer_id INT UNSIGNED NOT NULL,
			week DATE NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			field ${FIELD},
			first_label VARCHAR(30) NOT NULL,
			second_label VARCHAR(30) NOT NULL,
			${MEASURES}
		)`,
		`CREATE TABLE agreement_pair_daily_delta (
			id BIGINT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			field ${FIELD},
			day DATE NOT NULL,
			first_scorer_id INT UNSIGNED NOT NULL,
			second_scorer_id INT UNSIGNED NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			first_label VARCHAR(30) NOT NULL,
			second_label VARCHAR(30) NOT NULL,
			${MEASURES}
		)`
	];
	for (const s of statements) await q.sequelize.query(s);
};

export const down: Migration = async ({ context: q }) => {
	// counts still in a delta table are lost: let the worker fold them (or call foldDeltas()) first
	for (const t of ['agreement_pair_daily', 'agreement_weekly', 'agreement_daily', 'audit_daily']) await q.sequelize.query(`DROP TABLE IF EXISTS ${t}_delta`);
};
