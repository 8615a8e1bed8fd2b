/**
 * The Audit screen's pivot (src/lib/audit/pivot.ts): report rows (group × scorer, plus "All
 * scorers") into one row per group with a cell per scorer. The expected matrices below are worked
 * by hand from the rows written here.
 */
import { describe, expect, it } from 'vitest';
import { matrixScorers, pivot } from '../../src/lib/audit/pivot';

interface Row {
	scorer_id: number | null;
	kind: string;
	kind_name: string;
	errors: number;
	fields: number;
	rate: number | null;
}
const row = (scorer_id: number | null, kind: string, errors: number, fields: number): Row => ({
	scorer_id,
	kind,
	kind_name: `name of ${kind}`,
	errors,
	fields,
	rate: fields > 0 ? (100 * errors) / fields : null
});

// Ann (id 1) entered 200 fields, Bo (id 2) 50, Cy (id 3) none; the scorer report lists them by rate.
const scorerReport = [
	{ scorer_id: 2, scorer: 'Bo', fields: 50 },
	{ scorer_id: 1, scorer: 'Ann', fields: 200 },
	{ scorer_id: 3, scorer: 'Cy', fields: 0 },
	{ scorer_id: null, scorer: 'All scorers', fields: 250 }
];

describe('matrixScorers', () => {
	it('keeps the scorers with fields entered, in the report order, without the All row', () => {
		expect(matrixScorers(scorerReport)).toEqual([
			{ id: 2, name: 'Bo' },
			{ id: 1, name: 'Ann' }
		]);
	});
});

describe('pivot', () => {
	const scorers = matrixScorers(scorerReport);
	// transposition: Ann 2 of 200 (1 per 100), Bo 1 of 50 (2 per 100), all 3 of 250 (1.2 per 100)
	// digit_slip:    Ann 6 of 200 (3 per 100), Bo 0 of 50,             all 6 of 250 (2.4 per 100)
	// wrong_table:   nobody (0 errors), only the All row
	const rows: Row[] = [
		row(1, 'transposition', 2, 200),
		row(2, 'transposition', 1, 50),
		row(null, 'transposition', 3, 250),
		row(1, 'digit_slip', 6, 200),
		row(2, 'digit_slip', 0, 50),
		row(null, 'digit_slip', 6, 250),
		row(null, 'wrong_table', 0, 250)
	];
	const m = pivot(
		rows,
		scorers,
		(r) => r.kind,
		(r) => r.kind_name
	);

	it('orders groups by the All row’s errors, most first (6, 3, 0)', () => {
		expect(m.rows.map((r) => r.group)).toEqual(['digit_slip', 'transposition', 'wrong_table']);
		expect(m.rows.map((r) => r.name)).toEqual(['name of digit_slip', 'name of transposition', 'name of wrong_table']);
	});

	it('puts each scorer’s row in that scorer’s column (Bo first, then Ann)', () => {
		const t = m.rows[1];
		expect(t.cells.map((c) => c && [c.scorer_id, c.errors, c.fields])).toEqual([
			[2, 1, 50],
			[1, 2, 200]
		]);
		expect(t.all && [t.all.errors, t.all.fields]).toEqual([3, 250]);
	});

	it('boxes the highest rate among cells with errors: Bo’s 2 per 100 beats Ann’s 1 (column 0); Ann’s 3 vs Bo’s 0 (column 1); none without errors', () => {
		expect(m.rows.map((r) => r.top)).toEqual([1, 0, -1]);
	});

	it('leaves a cell empty where a scorer has no row, and takes the name from a scorer row when there is no All row', () => {
		const only = pivot(
			[row(1, 'carried', 1, 200)],
			scorers,
			(r) => r.kind,
			(r) => r.kind_name
		);
		expect(only.rows).toHaveLength(1);
		expect(only.rows[0].cells.map((c) => c?.errors ?? null)).toEqual([null, 1]);
		expect(only.rows[0].all).toBeNull();
		expect(only.rows[0].name).toBe('name of carried');
		// Ann's 0.5 per 100 is the only rate with errors: column 1
		expect(only.rows[0].top).toBe(1);
	});

	it('on a tie marks the first scorer of the list', () => {
		// both 1 error of 50 fields = 2 per 100
		const tie = pivot(
			[row(1, 'x', 1, 50), row(2, 'x', 1, 50)],
			scorers,
			(r) => r.kind,
			(r) => r.kind_name
		);
		expect(tie.rows[0].top).toBe(0);
	});
});
