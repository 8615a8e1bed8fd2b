/**
 * rebuildDailySums (audit-stats/record.ts) over 100,000 pairs: the sliced rebuild (slices of protocol
 * ids appended to the delta tables, then folded in batches, as the worker does) gives every cell the
 * sums of its rows and leaves no delta row. It replaced one INSERT … SELECT … GROUP BY … ON DUPLICATE
 * KEY UPDATE over every row, which failed on MariaDB 10.11 with "Error on delete of
 * '…#sql-temptable….MAI'" (errno 6) on the bench's seed of about 1M fields (issue 18). This data does
 * not reproduce that server failure (the old statement passes here too; the bench's real data with
 * the default 16 MB temporary table did fail): the test guards the rebuild's sums, not the bug.
 *
 * The rows here are invented straight into the row-level tables (no protocols behind them), dated
 * in 1999 with scorer ids no account has, and taken out again at the end (the summaries rebuilt
 * without them). The expected sums are added up in this file from the rows it wrote.
 */
import { describe, it, expect, afterAll } from 'vitest';
import { closeDb, exec, select, selectOne } from '../../src/lib/server/db';
import { applyToDaily, foldDeltas, rebuildDailySums } from '../../src/lib/server/audit-stats/record';

const FIELDS = ['raw', 'z', 'standard', 'scaled', 't', 'percentile'] as const;
const BASE = 1_900_000_000; // fake protocol ids (no protocol row), far above the real ones
const FIRST = 990_001;
const SECOND = 990_002;
/** 100,000 pairs, five to a cell: 20,000 cells per scorer (0, first, second), 60,000 groups per agreement table. */
const N = 100_000;
const PER_CELL = 5;
const YEAR = "BETWEEN '1999-01-01' AND '1999-12-31'";

interface Pair {
	protocol: number;
	test: string;
	field: string;
	day: string;
	x: number;
	y: number | null;
	label: string;
}

function pairs(): Pair[] {
	const out: Pair[] = [];
	for (let i = 0; i < N; i++) {
		const cell = Math.floor(i / PER_CELL);
		// the five pairs of a cell come from five protocols; (protocol, test, field) is unique: a
		// protocol holds 2,400 cells, 400 tests × 6 fields
		out.push({
			protocol: BASE + (i % PER_CELL) + PER_CELL * Math.floor(cell / 2400),
			test: `rb-${cell % 400}`,
			field: FIELDS[Math.floor(cell / 400) % 6],
			day: `1999-03-${String(1 + (cell % 28)).padStart(2, '0')}`,
			x: i % 7,
			y: i % 10 === 0 ? null : i % 5,
			label: `b${cell}` // a band id of its own: no two cells share a row
		});
	}
	return out;
}

async function insertPairs(rows: Pair[]) {
	for (let i = 0; i < rows.length; i += 2000) {
		const values = rows
			.slice(i, i + 2000)
			.map(
				(p) =>
					`(${p.protocol}, 1, 1, '${p.test}', 'rb', '${p.field}', ${FIRST}, ${SECOND}, ${p.x}, ${p.y ?? 'NULL'}, '${p.label}', '${p.label}', '${p.day} 12:00:00')`
			)
			.join(',');
		await exec(
			`INSERT INTO agreement_pairs (protocol_id, round, battery_id, test_code, domain, field, first_scorer_id, second_scorer_id,
			                              first_value, second_value, first_label, second_label, entered_at) VALUES ${values}`
		);
	}
}

async function cleanUp() {
	await exec(`DELETE FROM agreement_pairs WHERE protocol_id >= ${BASE}`);
	await exec(`DELETE FROM audit_fields WHERE protocol_id >= ${BASE}`);
}

afterAll(async () => {
	await cleanUp();
	await rebuildDailySums(); // the summaries as they were, without the rows of this file
	await closeDb();
}, 120_000);

describe('rebuildDailySums at scale', () => {
	it('rebuilds 100,000 pairs into 60,000 agreement cells per table from the row-level tables, folded, with the sums of the rows (issue 18)', async () => {
		await cleanUp();
		const rows = pairs();
		await insertPairs(rows);
		// two passes of each fake protocol, as recordSubmission writes them ('' = the whole pass)
		const protocols = [...new Set(rows.map((p) => p.protocol))];
		const fields = protocols.flatMap((p, k) => [
			`(${3_000_000_000 + 2 * k}, '', ${p}, 1, 'first', ${FIRST}, 1, '', ${30 + k}, 0, 0, '1999-03-01 10:00:00')`,
			`(${3_000_000_001 + 2 * k}, '', ${p}, 1, 'second', ${SECOND}, 1, '', ${31 + k}, 0, 0, '1999-03-02 10:00:00')`
		]);
		await exec(
			`INSERT INTO audit_fields (pass_id, test_code, protocol_id, round, which, scorer_id, battery_id, domain, fields_entered, raw_fields, derived_fields, entered_at)
			 VALUES ${fields.join(',')}`
		);

		await rebuildDailySums();

		for (const table of ['audit_daily', 'agreement_daily', 'agreement_weekly', 'agreement_pair_daily'])
			expect(Number((await selectOne<{ n: number }>(`SELECT COUNT(*) AS n FROM ${table}_delta`))!.n), `${table}_delta folded`).toBe(0);

		// by hand from the rows written above
		const both = rows.filter((p) => p.y !== null);
		const want = {
			cells: N / PER_CELL,
			pairs: both.length,
			one_sided: N - both.length,
			exact: both.filter((p) => p.x === p.y).length,
			sx: both.reduce((s, p) => s + p.x, 0),
			sxy: both.reduce((s, p) => s + p.x * p.y!, 0)
		};
		for (const [table, col] of [
			['agreement_daily', 'day'],
			['agreement_weekly', 'week']
		]) {
			for (const scorer of [0, FIRST, SECOND]) {
				const got = await selectOne<Record<string, number>>(
					`SELECT COUNT(*) AS cells, SUM(pairs) AS pairs, SUM(one_sided) AS one_sided, SUM(exact) AS exact, SUM(sx) AS sx, SUM(sxy) AS sxy
					   FROM ${table} WHERE scorer_id = :scorer AND ${col} ${YEAR}`,
					{ scorer }
				);
				expect(Object.fromEntries(Object.entries(got!).map(([k, v]) => [k, Number(v)])), `${table} scorer ${scorer}`).toEqual(want);
			}
		}
		const pairDaily = await selectOne<Record<string, number>>(
			`SELECT COUNT(*) AS cells, SUM(pairs) AS pairs, SUM(one_sided) AS one_sided, SUM(exact) AS exact, SUM(sx) AS sx, SUM(sxy) AS sxy
			   FROM agreement_pair_daily WHERE first_scorer_id = ${FIRST} AND second_scorer_id = ${SECOND} AND day ${YEAR}`
		);
		expect(Object.fromEntries(Object.entries(pairDaily!).map(([k, v]) => [k, Number(v)]))).toEqual(want);

		const passes = await selectOne<{ passes: number; fields: number }>(
			`SELECT SUM(passes) AS passes, SUM(fields_entered) AS fields FROM audit_daily WHERE day ${YEAR} AND scorer_id IN (${FIRST}, ${SECOND})`
		);
		// 45 fake protocols (5 × 9 blocks of 2,400 cells), two passes each: Σ(30 + k) + Σ(31 + k), k = 0..44
		expect(protocols).toHaveLength(45);
		expect({ passes: Number(passes!.passes), fields: Number(passes!.fields) }).toEqual({ passes: 90, fields: 45 * 30 + 990 + 45 * 31 + 990 });
	}, 180_000);

	/** Every summary row of this file's pairs (test codes rb-…, scorers FIRST / SECOND), ordered, as strings. */
	async function snapshot(): Promise<Record<string, string[]>> {
		const tables: Array<[string, string]> = [
			['agreement_daily', `test_code LIKE 'rb-%'`],
			['agreement_weekly', `test_code LIKE 'rb-%'`],
			['agreement_pair_daily', `test_code LIKE 'rb-%'`],
			['agreement_total', `test_code LIKE 'rb-%'`],
			['agreement_pair_total', `test_code LIKE 'rb-%'`],
			['agreement_values', `test_code LIKE 'rb-%'`],
			['audit_daily', `scorer_id IN (${FIRST}, ${SECOND})`]
		];
		const out: Record<string, string[]> = {};
		for (const [table, where] of tables) {
			const rows = await select<Record<string, unknown>>(`SELECT * FROM ${table} WHERE ${where}`);
			out[table] = rows.map((r) => JSON.stringify(Object.entries(r).map(([k, v]) => [k, String(v)]))).sort();
		}
		return out;
	}

	it('the whole-range totals and the pre-binned values: rebuilt equals recorded protocol by protocol and folded in batches (issue 18)', async () => {
		// the rows of the first test are still there (cleaned up after all); the summaries hold them, rebuilt
		const rows = pairs();
		const both = rows.filter((p) => p.y !== null);
		// by hand from the rows: agreement_total has one cell per cell of the fixture (its band ids are
		// unique), for each of scorer 0, FIRST and SECOND; agreement_values one row per distinct
		// (field, test, x, y) of the pairs both passes entered, for each of the three
		const distinct = new Set(both.map((p) => `${p.field}|${p.test}|${p.x}|${p.y}`)).size;
		const totals = await selectOne<Record<string, number>>(
			`SELECT (SELECT COUNT(*) FROM agreement_total WHERE test_code LIKE 'rb-%') AS cells,
			        (SELECT SUM(pairs) FROM agreement_total WHERE test_code LIKE 'rb-%' AND scorer_id = 0) AS pairs,
			        (SELECT SUM(one_sided) FROM agreement_total WHERE test_code LIKE 'rb-%' AND scorer_id = ${FIRST}) AS one_sided,
			        (SELECT SUM(sxy) FROM agreement_pair_total WHERE test_code LIKE 'rb-%') AS sxy,
			        (SELECT COUNT(*) FROM agreement_values WHERE test_code LIKE 'rb-%') AS value_rows,
			        (SELECT SUM(pairs) FROM agreement_values WHERE test_code LIKE 'rb-%' AND scorer_id = ${SECOND}) AS value_pairs`
		);
		expect(Object.fromEntries(Object.entries(totals!).map(([k, v]) => [k, Number(v)]))).toEqual({
			cells: 3 * (N / PER_CELL),
			pairs: both.length,
			one_sided: N - both.length,
			sxy: both.reduce((s, p) => s + p.x * p.y!, 0),
			value_rows: 3 * distinct,
			value_pairs: both.length
		});
		const rebuilt = await snapshot();

		// the same rows recorded the way submits record them: one protocol at a time into the delta
		// tables, then folded by the worker's fold in small batches (several per table)
		// (delta rows other files left are folded first, into rows this test does not read)
		await foldDeltas();
		await exec(`DELETE FROM agreement_daily WHERE test_code LIKE 'rb-%'`);
		await exec(`DELETE FROM agreement_weekly WHERE test_code LIKE 'rb-%'`);
		await exec(`DELETE FROM agreement_pair_daily WHERE test_code LIKE 'rb-%'`);
		await exec(`DELETE FROM agreement_total WHERE test_code LIKE 'rb-%'`);
		await exec(`DELETE FROM agreement_pair_total WHERE test_code LIKE 'rb-%'`);
		await exec(`DELETE FROM agreement_values WHERE test_code LIKE 'rb-%'`);
		await exec(`DELETE FROM audit_daily WHERE scorer_id IN (${FIRST}, ${SECOND})`);
		for (const protocol of [...new Set(rows.map((p) => p.protocol))]) await applyToDaily({ fromProtocol: protocol, toProtocol: protocol }, 1);
		await foldDeltas(7_000);
		expect(await snapshot()).toEqual(rebuilt);
	}, 300_000);
});
