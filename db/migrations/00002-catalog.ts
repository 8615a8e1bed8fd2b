import type { Migration } from '../migrate-types';

/**
 * The catalog: tests (versioned — a verified protocol keeps the version it was scored with),
 * batteries (ordered tests grouped by domain) and norm sets with their norm groups.
 */
export const up: Migration = async ({ context: q }) => {
	const statements = [
		`CREATE TABLE domains (
			code VARCHAR(40) PRIMARY KEY,
			name VARCHAR(80) NOT NULL,
			position INT NOT NULL DEFAULT 0
		)`,
		`CREATE TABLE tests (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			code VARCHAR(40) NOT NULL,
			version INT UNSIGNED NOT NULL DEFAULT 1,
			is_current TINYINT(1) NOT NULL DEFAULT 1,
			name VARCHAR(120) NOT NULL,
			domain VARCHAR(40) NOT NULL,
			unit VARCHAR(40) NOT NULL DEFAULT 'points',
			direction ENUM('higher_better','lower_better') NOT NULL,
			raw_min DECIMAL(12,4) NOT NULL,
			raw_max DECIMAL(12,4) NOT NULL,
			raw_decimals TINYINT UNSIGNED NOT NULL DEFAULT 0,
			reported VARCHAR(80) NOT NULL,
			bounds LONGTEXT NULL CHECK (bounds IS NULL OR JSON_VALID(bounds)),
			reliability DECIMAL(5,4) NULL,
			notes TEXT NULL,
			created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			UNIQUE KEY tests_code_version (code, version),
			KEY tests_current (is_current, code),
			CONSTRAINT tests_domain_fk FOREIGN KEY (domain) REFERENCES domains(code)
		)`,
		`CREATE TABLE norm_sets (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			code VARCHAR(40) NOT NULL,
			name VARCHAR(160) NOT NULL,
			source TEXT NOT NULL,
			version VARCHAR(40) NOT NULL DEFAULT '1',
			age_rule LONGTEXT NOT NULL CHECK (JSON_VALID(age_rule)),
			created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			UNIQUE KEY norm_sets_code_version (code, version)
		)`,
		`CREATE TABLE norm_groups (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			norm_set_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			group_code VARCHAR(40) NOT NULL,
			age_min_months INT UNSIGNED NOT NULL,
			age_max_months INT UNSIGNED NOT NULL,
			sex ENUM('F','M') NULL,
			edu_min TINYINT UNSIGNED NULL,
			edu_max TINYINT UNSIGNED NULL,
			mean DECIMAL(12,4) NOT NULL,
			sd DECIMAL(12,4) NOT NULL,
			n INT UNSIGNED NULL,
			UNIQUE KEY norm_groups_key (norm_set_id, test_code, group_code),
			KEY norm_groups_lookup (norm_set_id, test_code, age_min_months),
			CONSTRAINT norm_groups_set_fk FOREIGN KEY (norm_set_id) REFERENCES norm_sets(id) ON DELETE CASCADE
		)`,
		`CREATE TABLE batteries (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			code VARCHAR(40) NOT NULL,
			name VARCHAR(160) NOT NULL,
			description TEXT NULL,
			norm_set_id INT UNSIGNED NULL,
			created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			UNIQUE KEY batteries_code (code),
			CONSTRAINT batteries_norm_set_fk FOREIGN KEY (norm_set_id) REFERENCES norm_sets(id)
		)`,
		`CREATE TABLE battery_tests (
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			position INT UNSIGNED NOT NULL,
			PRIMARY KEY (battery_id, test_code),
			KEY battery_tests_order (battery_id, position),
			CONSTRAINT battery_tests_battery_fk FOREIGN KEY (battery_id) REFERENCES batteries(id) ON DELETE CASCADE
		)`
	];
	for (const s of statements) await q.sequelize.query(s);
};

export const down: Migration = async ({ context: q }) => {
	for (const t of ['battery_tests', 'batteries', 'norm_groups', 'norm_sets', 'tests', 'domains']) await q.sequelize.query(`DROP TABLE IF EXISTS ${t}`);
};
