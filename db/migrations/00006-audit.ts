import type { Migration } from '../migrate-types';

/**
 * Summary tables for the Audit screen, maintained by src/lib/server/audit-stats/record.ts inside
 * the workflow's own transactions (never rebuilt by a batch job). Two row-level tables keep what
 * each round contributed, so a round can be recorded again (its old contribution is subtracted):
 *
 *   audit_fields     per submitted pass × test: fields the scorer entered there (raw, derived);
 *                    plus one row per pass with test_code '' holding passes.fields_entered.
 *   agreement_pairs  per protocol round × test × field that at least one pass entered: both entries
 *                    as numbers and, for labelled fields, both AACN 2020 band ids. Bland–Altman
 *                    points are read from here.
 *
 * and three additive daily summaries the reports read (a few tens of thousands of rows at 17,000
 * protocols, where the row-level tables hold a quarter to half a million):
 *
 *   audit_daily           day × scorer × battery × test ('' = whole pass): passes, fields entered
 *   agreement_daily       day × scorer (0 = every pair once; s = pairs s entered either pass of)
 *                         × battery × test × field × (first label, second label): counts and sums
 *                         (Σx, Σy, Σx², Σy², Σxy, Σ(x−y), Σ(x−y)²) from which ICC, bias and limits
 *                         follow exactly, and the label cells kappa needs
 *   agreement_weekly      agreement_daily by ISO week: whole weeks of a range are read from here
 *                         (a quarter of the rows), the edge days from agreement_daily
 *   agreement_pair_daily  the same per (first scorer, second scorer), for the scorer-pair table
 *
 * Plus covering indexes on error_events (the errors are counted straight from it).
 */
const MEASURES = `pairs INT NOT NULL DEFAULT 0,
			one_sided INT NOT NULL DEFAULT 0,
			exact INT NOT NULL DEFAULT 0,
			sx DOUBLE NOT NULL DEFAULT 0, sy DOUBLE NOT NULL DEFAULT 0,
			sxx DOUBLE NOT NULL DEFAULT 0, syy DOUBLE NOT NULL DEFAULT 0, sxy DOUBLE NOT NULL DEFAULT 0,
			sd DOUBLE NOT NULL DEFAULT 0, sdd DOUBLE NOT NULL DEFAULT 0`;

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
			fields_entered INT UNSIGNED NOT NULL,
			raw_fields INT UNSIGNED NOT NULL,
			derived_fields INT UNSIGNED NOT NULL,
			entered_at DATETIME(3) NOT NULL,
			PRIMARY KEY (pass_id, test_code),
			KEY audit_fields_protocol (protocol_id, round)
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
			KEY agreement_pairs_field (field, entered_at, battery_id, test_code, first_scorer_id, second_scorer_id, first_value, second_value),
			KEY agreement_pairs_test (test_code, field, entered_at, battery_id, first_scorer_id, second_scorer_id, first_value, second_value)
		)`,
		`CREATE TABLE audit_daily (
			day DATE NOT NULL,
			scorer_id INT UNSIGNED NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			domain VARCHAR(40) NOT NULL,
			passes INT NOT NULL DEFAULT 0,
			fields_entered INT NOT NULL DEFAULT 0,
			raw_fields INT NOT NULL DEFAULT 0,
			derived_fields INT NOT NULL DEFAULT 0,
			PRIMARY KEY (day, scorer_id, battery_id, test_code),
			KEY audit_daily_test (test_code, day, scorer_id, battery_id),
			KEY audit_daily_scorer (scorer_id, test_code, day, battery_id)
		)`,
		`CREATE TABLE agreement_daily (
			scorer_id INT UNSIGNED NOT NULL,
			day DATE NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			field ENUM('raw','z','standard','scaled','t','percentile') NOT NULL,
			first_label VARCHAR(30) NOT NULL,
			second_label VARCHAR(30) NOT NULL,
			${MEASURES},
			PRIMARY KEY (scorer_id, day, battery_id, test_code, field, first_label, second_label),
			KEY agreement_daily_test (scorer_id, test_code, day)
		)`,
		// the same by ISO week (Monday): whole weeks of a date range read from here, edge days from agreement_daily
		`CREATE TABLE agreement_weekly (
			scorer_id INT UNSIGNED NOT NULL,
			week DATE NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			field ENUM('raw','z','standard','scaled','t','percentile') NOT NULL,
			first_label VARCHAR(30) NOT NULL,
			second_label VARCHAR(30) NOT NULL,
			${MEASURES},
			PRIMARY KEY (scorer_id, week, battery_id, test_code, field, first_label, second_label),
			KEY agreement_weekly_test (scorer_id, test_code, week)
		)`,
		`CREATE TABLE agreement_pair_daily (
			field ENUM('raw','z','standard','scaled','t','percentile') NOT NULL,
			day DATE NOT NULL,
			first_scorer_id INT UNSIGNED NOT NULL,
			second_scorer_id INT UNSIGNED NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			first_label VARCHAR(30) NOT NULL,
			second_label VARCHAR(30) NOT NULL,
			${MEASURES},
			PRIMARY KEY (field, day, first_scorer_id, second_scorer_id, battery_id, test_code, first_label, second_label),
			KEY agreement_pair_daily_test (field, test_code, day)
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
	for (const [index, table] of [
		['discrepancies_unresolved', 'discrepancies'],
		['error_events_protocol', 'error_events'],
		['error_events_scorer_cover', 'error_events'],
		['error_events_time', 'error_events']
	])
		await q.sequelize.query(`DROP INDEX ${index} ON ${table}`);
	for (const t of ['agreement_pair_daily', 'agreement_weekly', 'agreement_daily', 'audit_daily', 'agreement_pairs', 'audit_fields'])
		await q.sequelize.query(`DROP TABLE IF EXISTS ${t}`);
};
