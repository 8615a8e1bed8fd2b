import type { Migration } from '../migrate-types';

/**
 * Examinees, protocols, passes, discrepancies, attachments, and the error events the audit
 * screens aggregate (one row per error attributed to a scorer, written on resolution).
 */
export const up: Migration = async ({ context: q }) => {
	const statements = [
		`CREATE TABLE examinees (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			code VARCHAR(40) NOT NULL,
			name VARCHAR(160) NULL,
			birth_date DATE NOT NULL,
			sex ENUM('F','M','X') NULL,
			education_years TINYINT UNSIGNED NULL,
			created_by INT UNSIGNED NULL,
			created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			UNIQUE KEY examinees_code (code)
		)`,
		`CREATE TABLE protocols (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			examinee_id INT UNSIGNED NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			norm_set_id INT UNSIGNED NOT NULL,
			test_date DATE NOT NULL,
			age_text VARCHAR(20) NOT NULL,
			age_months INT UNSIGNED NOT NULL,
			status ENUM('draft','awaiting_second','in_review','verified') NOT NULL DEFAULT 'draft',
			round INT UNSIGNED NOT NULL DEFAULT 1,
			first_scorer_id INT UNSIGNED NOT NULL,
			second_scorer_id INT UNSIGNED NOT NULL,
			reviewer_id INT UNSIGNED NOT NULL,
			lock_version INT UNSIGNED NOT NULL DEFAULT 1,
			status_changed_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			verified_at DATETIME(3) NULL,
			verified_by INT UNSIGNED NULL,
			created_by INT UNSIGNED NULL,
			created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			KEY protocols_status (status, status_changed_at),
			KEY protocols_first (first_scorer_id, status),
			KEY protocols_second (second_scorer_id, status),
			KEY protocols_reviewer (reviewer_id, status),
			KEY protocols_examinee (examinee_id),
			CONSTRAINT protocols_examinee_fk FOREIGN KEY (examinee_id) REFERENCES examinees(id),
			CONSTRAINT protocols_battery_fk FOREIGN KEY (battery_id) REFERENCES batteries(id),
			CONSTRAINT protocols_norm_set_fk FOREIGN KEY (norm_set_id) REFERENCES norm_sets(id),
			CONSTRAINT protocols_first_fk FOREIGN KEY (first_scorer_id) REFERENCES users(id),
			CONSTRAINT protocols_second_fk FOREIGN KEY (second_scorer_id) REFERENCES users(id),
			CONSTRAINT protocols_reviewer_fk FOREIGN KEY (reviewer_id) REFERENCES users(id),
			CONSTRAINT protocols_duties CHECK (first_scorer_id <> second_scorer_id
				AND reviewer_id <> first_scorer_id AND reviewer_id <> second_scorer_id)
		)`,
		// The tests of a protocol, frozen at creation: test version and norm group used.
		`CREATE TABLE protocol_tests (
			protocol_id INT UNSIGNED NOT NULL,
			position INT UNSIGNED NOT NULL,
			test_id INT UNSIGNED NOT NULL,
			norm_group_id INT UNSIGNED NULL,
			override_reason TEXT NULL,
			PRIMARY KEY (protocol_id, position),
			CONSTRAINT protocol_tests_protocol_fk FOREIGN KEY (protocol_id) REFERENCES protocols(id) ON DELETE CASCADE,
			CONSTRAINT protocol_tests_test_fk FOREIGN KEY (test_id) REFERENCES tests(id),
			CONSTRAINT protocol_tests_group_fk FOREIGN KEY (norm_group_id) REFERENCES norm_groups(id)
		)`,
		`CREATE TABLE passes (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			protocol_id INT UNSIGNED NOT NULL,
			round INT UNSIGNED NOT NULL DEFAULT 1,
			which ENUM('first','second') NOT NULL,
			scorer_id INT UNSIGNED NOT NULL,
			status ENUM('draft','submitted') NOT NULL DEFAULT 'draft',
			scores LONGTEXT NOT NULL CHECK (JSON_VALID(scores)),
			fields_entered INT UNSIGNED NOT NULL DEFAULT 0,
			draft_version INT UNSIGNED NOT NULL DEFAULT 0,
			submitted_at DATETIME(3) NULL,
			updated_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3) ON UPDATE CURRENT_TIMESTAMP(3),
			UNIQUE KEY passes_one (protocol_id, round, which),
			KEY passes_scorer (scorer_id, submitted_at),
			CONSTRAINT passes_protocol_fk FOREIGN KEY (protocol_id) REFERENCES protocols(id) ON DELETE CASCADE,
			CONSTRAINT passes_scorer_fk FOREIGN KEY (scorer_id) REFERENCES users(id)
		)`,
		`CREATE TABLE discrepancies (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			protocol_id INT UNSIGNED NOT NULL,
			round INT UNSIGNED NOT NULL DEFAULT 1,
			position INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			field ENUM('raw','z','standard','scaled','t','percentile') NOT NULL,
			pass ENUM('first','second','both') NOT NULL,
			kind VARCHAR(30) NOT NULL,
			value VARCHAR(40) NULL,
			other VARCHAR(40) NULL,
			expected VARCHAR(40) NULL,
			out_of_range TINYINT(1) NOT NULL DEFAULT 0,
			resolution ENUM('first','second','recomputed','other') NULL,
			resolved_value VARCHAR(40) NULL,
			note TEXT NULL,
			resolved_by INT UNSIGNED NULL,
			resolved_at DATETIME(3) NULL,
			lock_version INT UNSIGNED NOT NULL DEFAULT 1,
			UNIQUE KEY discrepancies_order (protocol_id, round, position),
			KEY discrepancies_open (protocol_id, resolved_at),
			CONSTRAINT discrepancies_protocol_fk FOREIGN KEY (protocol_id) REFERENCES protocols(id) ON DELETE CASCADE
		)`,
		`CREATE TABLE attachments (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			protocol_id INT UNSIGNED NOT NULL,
			filename VARCHAR(200) NOT NULL,
			mime VARCHAR(60) NOT NULL,
			size INT UNSIGNED NOT NULL,
			sha256 CHAR(64) NOT NULL,
			storage_name VARCHAR(100) NOT NULL,
			uploaded_by INT UNSIGNED NOT NULL,
			created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			KEY attachments_protocol (protocol_id),
			CONSTRAINT attachments_protocol_fk FOREIGN KEY (protocol_id) REFERENCES protocols(id) ON DELETE CASCADE
		)`,
		// One row per field a scorer entered in a submitted pass (the audit's denominators are sums
		// of passes.fields_entered) and one row per error attributed to a scorer on resolution.
		`CREATE TABLE error_events (
			id BIGINT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			discrepancy_id INT UNSIGNED NOT NULL,
			protocol_id INT UNSIGNED NOT NULL,
			scorer_id INT UNSIGNED NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			domain VARCHAR(40) NOT NULL,
			field ENUM('raw','z','standard','scaled','t','percentile') NOT NULL,
			kind VARCHAR(30) NOT NULL,
			entered_at DATETIME(3) NOT NULL,
			UNIQUE KEY error_events_one (discrepancy_id, scorer_id),
			KEY error_events_scorer (scorer_id, entered_at),
			KEY error_events_kind (kind, scorer_id, entered_at),
			KEY error_events_test (test_code, scorer_id, entered_at)
		)`
	];
	for (const s of statements) await q.sequelize.query(s);
};

export const down: Migration = async ({ context: q }) => {
	for (const t of ['error_events', 'attachments', 'discrepancies', 'passes', 'protocol_tests', 'protocols', 'examinees'])
		await q.sequelize.query(`DROP TABLE IF EXISTS ${t}`);
};
