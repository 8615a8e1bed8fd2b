import type { Migration } from '../migrate-types';

/**
 * The audit's domain of rows recorded before composites had one (9ba9506, "Composites in the audit"):
 * a code that was not a test's was filed under the domain `unknown`, so a composite's fields and
 * errors showed under "unknown" until their round was recorded again. Now a composite's rows are
 * recorded under `_composites` (COMPOSITE_DOMAIN in src/lib/server/audit-stats/record.ts, shown as
 * "Composites"); a test's rows under its catalog domain (the current, or else the latest, version).
 *
 * Backfilled here from the catalog, only where a row still says `unknown`: a code of a composite
 * (the battery's `composites`, or the definition a protocol froze in `protocol_composites`) becomes
 * `_composites`. A test's rows never said `unknown` (its domain was read from `tests` then as now),
 * and a code the catalog does not know keeps `unknown` (nothing says what it was). Every table that carries the domain: the row-level
 * audit_fields, agreement_pairs, error_events, and the per-test summary audit_daily with its
 * `_delta` (the domain is not part of their key, so no sum moves). Idempotent: a second run finds no
 * `unknown` row it can place; on an empty database it changes nothing.
 *
 * The value `_composites` is written out here, not imported: a migration is history, and keeps the
 * value it was written with.
 */
const COMPOSITE_DOMAIN = '_composites';
const TABLES = ['audit_fields', 'agreement_pairs', 'error_events', 'audit_daily', 'audit_daily_delta'];

export const up: Migration = async ({ context: q }) => {
	const run = (sql: string, replacements: Record<string, unknown> = {}) => q.sequelize.query(sql, { replacements });
	for (const table of TABLES) {
		await run(
			`UPDATE ${table} x SET x.domain = :composite
			  WHERE x.domain = 'unknown'
			    AND (EXISTS (SELECT 1 FROM composites c WHERE c.code = x.test_code)
			         OR EXISTS (SELECT 1 FROM protocol_composites pc WHERE pc.code = x.test_code))`,
			{ composite: COMPOSITE_DOMAIN }
		);
	}
};

/** Nothing to undo: the rows now carry what the current code records (putting `unknown` back would lose that). */
export const down: Migration = async () => {};
