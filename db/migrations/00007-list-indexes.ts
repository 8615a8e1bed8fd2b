import type { Migration } from '../migrate-types';

/**
 * Indexes for the worklists and protocol lists, from the benchmark's EXPLAIN: a reviewer's open
 * reviews in age order without a filesort, a scorer's protocols found through their passes, and
 * the audit's fields-entered-by-domain read from an index rather than the whole summary table.
 */
export const up: Migration = async ({ context: q }) => {
	await q.sequelize.query('CREATE INDEX protocols_reviewer_age ON protocols (reviewer_id, status, status_changed_at, id)');
	await q.sequelize.query('CREATE INDEX passes_scorer_protocol ON passes (scorer_id, protocol_id)');
	await q.sequelize.query('CREATE INDEX audit_daily_domain ON audit_daily (scorer_id, domain, test_code, fields_entered)');
};

export const down: Migration = async ({ context: q }) => {
	await q.sequelize.query('DROP INDEX audit_daily_domain ON audit_daily');
	await q.sequelize.query('DROP INDEX passes_scorer_protocol ON passes');
	await q.sequelize.query('DROP INDEX protocols_reviewer_age ON protocols');
};
