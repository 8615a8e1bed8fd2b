import type { Migration } from '../migrate-types';

/**
 * The Audit screen's "charges resting on the reviewer's judgement" (audit-stats/screen.ts,
 * `judgementRows`: WHERE judgement = 1 … ORDER BY entered_at DESC, id DESC LIMIT 500) read every
 * error_events row and sorted them (bench:db, issue 18). With this index it reads the newest
 * judgement rows backwards and stops at the page (the primary key id is the index's last column).
 */
export const up: Migration = async ({ context: q }) => {
	await q.sequelize.query('CREATE INDEX error_events_judgement ON error_events (judgement, entered_at)');
};

export const down: Migration = async ({ context: q }) => {
	await q.sequelize.query('DROP INDEX error_events_judgement ON error_events');
};
