/**
 * The Audit screen's matrices (kinds × scorers, tests × scorers): report rows, one per group ×
 * scorer plus an "All scorers" row per group (scorer_id null), turned into one row per group with a
 * cell per scorer. Pure (no Svelte, no server): tests/unit/audit-pivot.test.ts.
 */

/** What the pivot reads of a report row. */
export interface PivotRow {
	scorer_id: number | null;
	errors: number;
	fields: number;
	rate: number | null;
}

export interface PivotScorer {
	id: number;
	name: string;
}

export interface MatrixRow<R> {
	group: string;
	name: string;
	/** One per scorer, in the order of `scorers`; null where the scorer has no row for the group. */
	cells: Array<R | null>;
	/** The group's "All scorers" row. */
	all: R | null;
	/** Index of the scorer with the highest rate among those with errors; -1 when nobody has one. */
	top: number;
}

export interface Matrix<R> {
	scorers: PivotScorer[];
	rows: Array<MatrixRow<R>>;
}

/**
 * Rows of groups (most errors of all scorers first; ties keep the report's order), a cell per
 * scorer. The highest rate is marked only among cells with errors and fields entered; on a tie the
 * first scorer of the list is marked.
 */
export function pivot<R extends PivotRow>(rows: readonly R[], scorers: readonly PivotScorer[], groupOf: (r: R) => string, nameOf: (r: R) => string): Matrix<R> {
	const groups = [...new Set(rows.map(groupOf))];
	const byKey = new Map<string, R>();
	for (const r of rows) byKey.set(`${groupOf(r)}|${r.scorer_id ?? ''}`, r);
	const out = groups.map((g) => {
		const cells = scorers.map((s) => byKey.get(`${g}|${s.id}`) ?? null);
		const all = byKey.get(`${g}|`) ?? null;
		const rates = cells.map((c) => (c && c.fields > 0 && c.errors > 0 && c.rate !== null ? c.rate : -1));
		const max = Math.max(-1, ...rates);
		const named = all ?? cells.find((c) => c !== null);
		return { group: g, name: named ? nameOf(named) : g, cells, all, top: max > 0 ? rates.indexOf(max) : -1 };
	});
	out.sort((a, b) => (b.all?.errors ?? 0) - (a.all?.errors ?? 0));
	return { scorers: [...scorers], rows: out };
}

/** The scorers a matrix has columns for: those of the scorer report with fields entered, in its order. */
export function matrixScorers(scorerRows: ReadonlyArray<{ scorer_id: number | null; scorer: string; fields: number }>): PivotScorer[] {
	return scorerRows.filter((r) => r.scorer_id !== null && r.fields > 0).map((r) => ({ id: r.scorer_id as number, name: r.scorer }));
}
