import type { Migration } from '../migrate-types';

/**
 * Norms as the manuals give them (issue 14): a norm group holds its test's norm in one form —
 * mean/SD (as before), a conversion table (rows in `norm_table_rows`), or a regression equation
 * (intercept, coefficients over age/education/sex, residual SD in `sd`). Percentile-only tests are
 * tables of scale `percentile`. Batteries define composites, whose norms are norm groups too
 * (`subject = 'composite'`, `test_code` = the composite's code; codes are unique across tests and
 * composites). Protocols freeze their composites (definition and norm group) and store the
 * covariates a regression norm used. Discrepancy and audit fields gain `sum` (a composite's sum).
 */
const FIELD_OLD = "ENUM('raw','z','standard','scaled','t','percentile') NOT NULL";
const FIELD_NEW = "ENUM('raw','z','standard','scaled','t','percentile','sum') NOT NULL";
const FIELD_TABLES = ['discrepancies', 'error_events', 'agreement_pairs', 'agreement_daily', 'agreement_weekly', 'agreement_pair_daily'];

export const up: Migration = async ({ context: q }) => {
	const statements = [
		`ALTER TABLE norm_sets ADD COLUMN covariate_age ENUM('whole_years','decimal_years') NOT NULL DEFAULT 'whole_years' AFTER age_rule`,
		`ALTER TABLE norm_groups
			ADD COLUMN subject ENUM('test','composite') NOT NULL DEFAULT 'test' AFTER norm_set_id,
			ADD COLUMN form ENUM('mean_sd','table','regression') NOT NULL DEFAULT 'mean_sd' AFTER edu_max,
			ADD COLUMN scale ENUM('scaled','standard','t','percentile') NULL AFTER form,
			ADD COLUMN intercept DECIMAL(16,6) NULL AFTER scale,
			ADD COLUMN coefficients LONGTEXT NULL CHECK (coefficients IS NULL OR JSON_VALID(coefficients)) AFTER intercept,
			MODIFY mean DECIMAL(12,4) NULL,
			MODIFY sd DECIMAL(12,4) NULL`,
		`CREATE TABLE norm_table_rows (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			norm_group_id INT UNSIGNED NOT NULL,
			position SMALLINT UNSIGNED NOT NULL,
			lo DECIMAL(12,4) NOT NULL,
			hi DECIMAL(12,4) NOT NULL,
			score SMALLINT NULL,
			percentile VARCHAR(12) NULL,
			UNIQUE KEY norm_table_rows_order (norm_group_id, position),
			CONSTRAINT norm_table_rows_group_fk FOREIGN KEY (norm_group_id) REFERENCES norm_groups(id) ON DELETE CASCADE
		)`,
		`CREATE TABLE composites (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			battery_id INT UNSIGNED NOT NULL,
			code VARCHAR(40) NOT NULL,
			name VARCHAR(120) NOT NULL,
			position SMALLINT UNSIGNED NOT NULL,
			part_field ENUM('scaled','standard','t') NOT NULL,
			parts LONGTEXT NOT NULL CHECK (JSON_VALID(parts)),
			reported VARCHAR(80) NOT NULL,
			reliability DECIMAL(5,4) NULL,
			created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			UNIQUE KEY composites_code (code),
			KEY composites_battery (battery_id, position),
			CONSTRAINT composites_battery_fk FOREIGN KEY (battery_id) REFERENCES batteries(id) ON DELETE CASCADE
		)`,
		`CREATE TABLE protocol_composites (
			protocol_id INT UNSIGNED NOT NULL,
			position SMALLINT UNSIGNED NOT NULL,
			code VARCHAR(40) NOT NULL,
			definition LONGTEXT NOT NULL CHECK (JSON_VALID(definition)),
			norm_group_id INT UNSIGNED NULL,
			PRIMARY KEY (protocol_id, position),
			CONSTRAINT protocol_composites_protocol_fk FOREIGN KEY (protocol_id) REFERENCES protocols(id) ON DELETE CASCADE,
			CONSTRAINT protocol_composites_group_fk FOREIGN KEY (norm_group_id) REFERENCES norm_groups(id)
		)`,
		`ALTER TABLE protocols ADD COLUMN covariates LONGTEXT NULL CHECK (covariates IS NULL OR JSON_VALID(covariates)) AFTER age_months`,
		...FIELD_TABLES.map((t) => `ALTER TABLE ${t} MODIFY field ${FIELD_NEW}`)
	];
	for (const s of statements) await q.sequelize.query(s);
};

export const down: Migration = async ({ context: q }) => {
	for (const t of FIELD_TABLES) await q.sequelize.query(`DELETE FROM ${t} WHERE field = 'sum'`);
	for (const t of FIELD_TABLES) await q.sequelize.query(`ALTER TABLE ${t} MODIFY field ${FIELD_OLD}`);
	await q.sequelize.query('ALTER TABLE protocols DROP COLUMN covariates');
	for (const t of ['protocol_composites', 'composites', 'norm_table_rows']) await q.sequelize.query(`DROP TABLE IF EXISTS ${t}`);
	await q.sequelize.query("DELETE FROM norm_groups WHERE form <> 'mean_sd' OR subject <> 'test'");
	await q.sequelize.query(
		'ALTER TABLE norm_groups DROP COLUMN subject, DROP COLUMN form, DROP COLUMN scale, DROP COLUMN intercept, DROP COLUMN coefficients, MODIFY mean DECIMAL(12,4) NOT NULL, MODIFY sd DECIMAL(12,4) NOT NULL'
	);
	await q.sequelize.query('ALTER TABLE norm_sets DROP COLUMN covariate_age');
};
