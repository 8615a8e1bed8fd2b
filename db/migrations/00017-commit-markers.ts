import type { Migration } from '../migrate-types';

/**
 * One row per committed service transaction (src/lib/server/db.ts `transaction()`): when the
 * connection is lost during COMMIT (a database node stopped under it), the app looks the marker up
 * through another node to learn whether the commit was applied, instead of answering "unavailable"
 * for a change that was made or running it twice. The worker deletes markers after an hour.
 */
export const up: Migration = async ({ context: q }) => {
	await q.sequelize.query(`CREATE TABLE commit_markers (
		id CHAR(36) NOT NULL PRIMARY KEY,
		created_at DATETIME(3) NOT NULL DEFAULT CURRENT_TIMESTAMP(3),
		INDEX commit_markers_created (created_at)
	) ENGINE=InnoDB DEFAULT CHARSET=utf8mb4 COLLATE=utf8mb4_unicode_ci`);
};

export const down: Migration = async ({ context: q }) => {
	await q.sequelize.query('DROP TABLE commit_markers');
};
