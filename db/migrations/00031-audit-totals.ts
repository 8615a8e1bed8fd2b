import { QueryTypes } from 'sequelize';
import type { Migration } from '../migrate-types';

/**
 * Whole-range summaries for the Audit's agreement reports (issue 18). With no date filter the
 * reports used to add up every week of agreement_weekly (about 38,000 scorer-0 rows at 5M entered
 * fields), every day of agreement_pair_daily, and every row of agreement_pairs for the Bland–Altman
 * plot; these hold the same sums without the date:
 *
 *   agreement_total       agreement_weekly without the week: scorer (0 = every pair once) × battery ×
 *                         test × field × (first label, second label)
 *   agreement_pair_total  agreement_pair_daily without the day
 *   agreement_values      the Bland–Altman plot pre-binned: scorer (0 = every pair once; s = the
 *                         pairs s entered either pass of, once) × field × battery × test × (first
 *                         value, second value) → pairs, for the pairs both passes entered as numbers
 *
 * The first two are kept by the fold (src/lib/server/audit-stats/record.ts, `foldDeltas`): the
 * delta rows folded into agreement_weekly / agreement_pair_daily are added to them in the same
 * transaction, so a report reads a total plus the delta rows not yet folded, as it reads the weekly
 * and daily sums. agreement_values has its own append-only delta table, written by the submit with
 * the others (`applyToDaily`) and folded the same way.
 *
 * Filled here from what is already there, so a database can be migrated instead of rebuilt: the
 * totals from the folded weekly / daily sums (the delta rows not yet folded stay where they are and
 * are read as before), the values from the row-level agreement_pairs in slices of protocol ids (each
 * slice groups a bounded number of rows: one grouping of millions of rows outgrew MariaDB's
 * in-memory temporary table on the bench's data, see rebuildDailySums).
 */
const MEASURES = `pairs INT NOT NULL DEFAULT 0,
			one_sided INT NOT NULL DEFAULT 0,
			exact INT NOT NULL DEFAULT 0,
			sx DOUBLE NOT NULL DEFAULT 0, sy DOUBLE NOT NULL DEFAULT 0,
			sxx DOUBLE NOT NULL DEFAULT 0, syy DOUBLE NOT NULL DEFAULT 0, sxy DOUBLE NOT NULL DEFAULT 0,
			sd DOUBLE NOT NULL DEFAULT 0, sdd DOUBLE NOT NULL DEFAULT 0`;
const MEASURE_NAMES = ['pairs', 'one_sided', 'exact', 'sx', 'sy', 'sxx', 'syy', 'sxy', 'sd', 'sdd'];
const FIELD = "ENUM('raw','z','standard','scaled','t','percentile') NOT NULL";
const VALUES_COLUMNS = `scorer_id INT UNSIGNED NOT NULL,
			field ${FIELD},
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			first_value DOUBLE NOT NULL,
			second_value DOUBLE NOT NULL,
			pairs INT NOT NULL DEFAULT 0`;
const SLICE = 2000;

export const up: Migration = async ({ context: q }) => {
	const run = (sql: string, replacements: Record<string, unknown> = {}) => q.sequelize.query(sql, { replacements });
	await run(`CREATE TABLE agreement_total (
			scorer_id INT UNSIGNED NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			field ${FIELD},
			first_label VARCHAR(30) NOT NULL,
			second_label VARCHAR(30) NOT NULL,
			${MEASURES},
			PRIMARY KEY (scorer_id, battery_id, test_code, field, first_label, second_label),
			KEY agreement_total_test (scorer_id, test_code)
		)`);
	await run(`CREATE TABLE agreement_pair_total (
			field ${FIELD},
			first_scorer_id INT UNSIGNED NOT NULL,
			second_scorer_id INT UNSIGNED NOT NULL,
			battery_id INT UNSIGNED NOT NULL,
			test_code VARCHAR(40) NOT NULL,
			first_label VARCHAR(30) NOT NULL,
			second_label VARCHAR(30) NOT NULL,
			${MEASURES},
			PRIMARY KEY (field, first_scorer_id, second_scorer_id, battery_id, test_code, first_label, second_label),
			KEY agreement_pair_total_test (field, test_code)
		)`);
	await run(`CREATE TABLE agreement_values (
			${VALUES_COLUMNS},
			PRIMARY KEY (scorer_id, field, battery_id, test_code, first_value, second_value),
			KEY agreement_values_test (scorer_id, field, test_code)
		)`);
	await run(`CREATE TABLE agreement_values_delta (
			id BIGINT UNSIGNED AUTO_INCREMENT PRIMARY KEY,
			${VALUES_COLUMNS}
		)`);

	const cols = MEASURE_NAMES.join(', ');
	const sums = MEASURE_NAMES.map((c) => `SUM(${c})`).join(', ');
	await run(`INSERT INTO agreement_total (scorer_id, battery_id, test_code, field, first_label, second_label, ${cols})
		SELECT scorer_id, battery_id, test_code, field, first_label, second_label, ${sums} FROM agreement_weekly
		 GROUP BY scorer_id, battery_id, test_code, field, first_label, second_label`);
	await run(`INSERT INTO agreement_pair_total (field, first_scorer_id, second_scorer_id, battery_id, test_code, first_label, second_label, ${cols})
		SELECT field, first_scorer_id, second_scorer_id, battery_id, test_code, first_label, second_label, ${sums} FROM agreement_pair_daily
		 GROUP BY field, first_scorer_id, second_scorer_id, battery_id, test_code, first_label, second_label`);
	// the same statement as applyToDaily's for agreement_values_delta, into the table itself, a slice at a time
	for (let after = -1; ;) {
		const rows = await q.sequelize.query<{ id: number | null }>('SELECT MIN(protocol_id) AS id FROM agreement_pairs WHERE protocol_id > :after', {
			replacements: { after },
			type: QueryTypes.SELECT
		});
		if (rows[0]?.id === null || rows[0]?.id === undefined) break;
		const from = Number(rows[0].id);
		after = from + SLICE - 1;
		await run(
			// grouped in memory (up to 256 MB, this statement only): on-disk temporary tables failed on this MariaDB (see rebuildDailySums)
			`SET STATEMENT tmp_table_size = 268435456, max_heap_table_size = 268435456 FOR
			 INSERT INTO agreement_values (scorer_id, field, battery_id, test_code, first_value, second_value, pairs)
			 SELECT CASE r.k WHEN 0 THEN 0 WHEN 1 THEN g.first_scorer_id ELSE g.second_scorer_id END, g.field, g.battery_id, g.test_code,
			        g.first_value, g.second_value, COUNT(*)
			   FROM agreement_pairs g JOIN (SELECT 0 AS k UNION ALL SELECT 1 UNION ALL SELECT 2) r ON r.k < 2 OR g.second_scorer_id <> g.first_scorer_id
			  WHERE g.protocol_id BETWEEN :from AND :to AND g.first_value IS NOT NULL AND g.second_value IS NOT NULL
			  GROUP BY 1, 2, 3, 4, 5, 6
			 ON DUPLICATE KEY UPDATE pairs = pairs + VALUES(pairs)`,
			{ from, to: after }
		);
	}
};

export const down: Migration = async ({ context: q }) => {
	for (const t of ['agreement_values_delta', 'agreement_values', 'agreement_pair_total', 'agreement_total'])
		await q.sequelize.query(`DROP TABLE IF EXISTS ${t}`);
};
