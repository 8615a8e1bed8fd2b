import type { Migration } from '../migrate-types';

/** The whole first schema. Times are UTC DATETIME(3); JSON columns are LONGTEXT checked by MariaDB. */
export const up: Migration = async ({ context: q }) => {
	const statements = [
		`CREATE TABLE users (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			email VARCHAR(254) NOT NULL,
			name VARCHAR(120) NOT NULL,
			password_hash VARCHAR(100) NULL,
			roles VARCHAR(100) NOT NULL DEFAULT '',
			active TINYINT(1) NOT NULL DEFAULT 1,
			session_version INT UNSIGNED NOT NULL DEFAULT 1,
			last_sign_in_at DATETIME(3) NULL,
			created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			updated_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3) ON UPDATE CURRENT_TIMESTAMP(3),
			UNIQUE KEY users_email (email)
		)`,
		`CREATE TABLE user_tokens (
			id INT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			user_id INT UNSIGNED NOT NULL,
			purpose ENUM('invite','reset') NOT NULL,
			token_hash CHAR(64) NOT NULL,
			expires_at DATETIME(3) NOT NULL,
			used_at DATETIME(3) NULL,
			created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			UNIQUE KEY user_tokens_hash (token_hash),
			KEY user_tokens_user (user_id),
			CONSTRAINT user_tokens_user_fk FOREIGN KEY (user_id) REFERENCES users(id)
		)`,
		`CREATE TABLE settings (
			name VARCHAR(64) PRIMARY KEY,
			value LONGTEXT NOT NULL CHECK (JSON_VALID(value)),
			updated_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3) ON UPDATE CURRENT_TIMESTAMP(3)
		)`,
		// Append-only history of every create, change, submission, resolution, sign-off and reopen.
		// The app's database user gets SELECT and INSERT only (scripts/migrate.ts sets the grants).
		`CREATE TABLE audit_events (
			id BIGINT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			actor_id INT UNSIGNED NULL,
			entity VARCHAR(40) NOT NULL,
			entity_id VARCHAR(64) NOT NULL,
			action VARCHAR(40) NOT NULL,
			protocol_id INT UNSIGNED NULL,
			old_value LONGTEXT NULL,
			new_value LONGTEXT NULL,
			reason TEXT NULL,
			KEY audit_protocol (protocol_id, id),
			KEY audit_entity (entity, entity_id, id),
			KEY audit_at (at)
		)`,
		`CREATE TABLE outbox (
			id BIGINT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			kind VARCHAR(40) NOT NULL,
			idempotency_key VARCHAR(120) NOT NULL,
			payload LONGTEXT NOT NULL CHECK (JSON_VALID(payload)),
			created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			dispatched_at DATETIME(3) NULL,
			attempts INT UNSIGNED NOT NULL DEFAULT 0,
			last_error TEXT NULL,
			UNIQUE KEY outbox_key (idempotency_key),
			KEY outbox_pending (dispatched_at, id)
		)`,
		`CREATE TABLE mail_log (
			id BIGINT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			idempotency_key VARCHAR(120) NOT NULL,
			kind VARCHAR(40) NOT NULL,
			protocol_id INT UNSIGNED NULL,
			reminder_no INT UNSIGNED NULL,
			recipients TEXT NOT NULL,
			subject VARCHAR(300) NOT NULL,
			message_id VARCHAR(200) NULL,
			status ENUM('sending','sent') NOT NULL DEFAULT 'sending',
			created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
			sent_at DATETIME(3) NULL,
			UNIQUE KEY mail_log_key (idempotency_key),
			KEY mail_log_protocol (protocol_id, id)
		)`
	];
	for (const s of statements) await q.sequelize.query(s);
};

export const down: Migration = async ({ context: q }) => {
	for (const t of ['mail_log', 'outbox', 'audit_events', 'settings', 'user_tokens', 'users']) await q.sequelize.query(`DROP TABLE IF EXISTS ${t}`);
};
