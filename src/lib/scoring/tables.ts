/**
 * Checks on a conversion table (shared/spec/reconcile.md, "Norm forms" → `table`), pure, for the batch
 * schema and for a catalog that checks a table while it is typed. Each problem names the row:
 * `{ path: ['rows', 3, 'raw', 0], message: 'gap: raw 7 is in no row (rows[2] ends at 6)' }`.
 */
import { SCALES, type Bounds } from './scales';
import { canonicalBand } from './forms';
import type { TableScale } from './norms';

export interface TableProblem {
	/** Path inside the norm entry, e.g. `['rows', 3, 'raw', 0]`. */
	path: (string | number)[];
	message: string;
}

export interface TableSpec {
	/** `raw` for a test's table, `sum` for a composite's. */
	key: 'raw' | 'sum';
	/** The lowest and highest valid raw score (or sum) and its decimals (sums: 0). */
	min: number;
	max: number;
	decimals: number;
	scale: TableScale;
	/** Bounds of the table's own scale (the test's own where it has them); ignored for percentile tables. */
	bounds?: Bounds;
}

interface RowLike {
	raw?: unknown;
	sum?: unknown;
	score?: unknown;
	percentile?: unknown;
}

/** Whether a table percentile is valid: a whole number 1–99, "<1", ">99"; bands only when `bands`. */
export function validTablePercentile(p: unknown, bands: boolean): boolean {
	if (typeof p === 'number') return Number.isInteger(p) && p >= 1 && p <= 99;
	if (typeof p !== 'string') return false;
	const t = p.trim();
	if (t === '<1' || t === '>99') return true;
	if (/^\d+$/.test(t)) {
		const n = Number(t);
		return n >= 1 && n <= 99;
	}
	return bands && canonicalBand(t) !== null;
}

const fmt = (k: number, f: number, d: number): string => (k / f).toFixed(d);

/** Every problem of a table's rows against its spec (empty when the table is good). */
export function checkTableRows(rows: readonly RowLike[], spec: TableSpec): TableProblem[] {
	const problems: TableProblem[] = [];
	const { key, decimals: d } = spec;
	const f = 10 ** d;
	const what = key === 'raw' ? 'raw score' : 'sum';
	if (!Number.isInteger(d) || d < 0 || d > 6 || !Number.isFinite(spec.min) || !Number.isFinite(spec.max) || spec.min > spec.max) {
		return [{ path: [], message: `cannot check the table: the ${what} range or decimals are not valid` }];
	}
	if (rows.length === 0) return [{ path: ['rows'], message: 'a table needs at least one row' }];
	const min = Math.round(spec.min * f);
	const max = Math.round(spec.max * f);
	const pctOnly = spec.scale === 'percentile';
	const withPct = rows[0].percentile !== undefined && rows[0].percentile !== null;
	let prevHi: number | null = null;
	rows.forEach((row, i) => {
		const range = row[key];
		if (
			!Array.isArray(range) ||
			range.length !== 2 ||
			typeof range[0] !== 'number' ||
			typeof range[1] !== 'number' ||
			!Number.isFinite(range[0]) ||
			!Number.isFinite(range[1])
		) {
			problems.push({ path: ['rows', i, key], message: `expected [low, high] ${what}s` });
			prevHi = null;
			return;
		}
		const ks: number[] = [];
		let precise = true;
		for (const end of [0, 1]) {
			const x = range[end] as number;
			const k = Math.round(x * f);
			if (Math.abs(x * f - k) > 1e-6) {
				precise = false;
				problems.push({
					path: ['rows', i, key, end],
					message: d === 0 ? `${x} is not a whole number` : `${x} has more decimals than the test's raw scores (${d})`
				});
			}
			ks.push(k);
		}
		if (!precise) {
			prevHi = null;
			return;
		}
		const [lo, hi] = ks;
		if (lo > hi) problems.push({ path: ['rows', i, key], message: `low end ${fmt(lo, f, d)} is above high end ${fmt(hi, f, d)}` });
		if (i === 0 && lo !== min) {
			problems.push({ path: ['rows', 0, key, 0], message: `the first row must start at the lowest ${what} ${fmt(min, f, d)}, not ${fmt(lo, f, d)}` });
		}
		if (prevHi !== null) {
			if (lo > prevHi + 1) {
				const from = fmt(prevHi + 1, f, d);
				const to = fmt(lo - 1, f, d);
				problems.push({
					path: ['rows', i, key, 0],
					message: `gap: ${what} ${from === to ? from : `${from} to ${to}`} is in no row (rows[${i - 1}] ends at ${fmt(prevHi, f, d)})`
				});
			} else if (lo <= prevHi) {
				problems.push({ path: ['rows', i, key, 0], message: `overlaps rows[${i - 1}], which ends at ${fmt(prevHi, f, d)}` });
			}
		}
		if (i === rows.length - 1 && hi !== max) {
			problems.push({ path: ['rows', i, key, 1], message: `the last row must end at the highest ${what} ${fmt(max, f, d)}, not ${fmt(hi, f, d)}` });
		}
		prevHi = hi;
	});
	rows.forEach((row, i) => {
		if (pctOnly) {
			if (row.score !== undefined) problems.push({ path: ['rows', i, 'score'], message: 'a percentile table has no score (give the percentile or band only)' });
			if (row.percentile === undefined || row.percentile === null) {
				problems.push({ path: ['rows', i, 'percentile'], message: 'required on a percentile table' });
			} else if (!validTablePercentile(row.percentile, true)) {
				problems.push({
					path: ['rows', i, 'percentile'],
					message: `expected a whole number 1–99, "<1", ">99" or a band ("10-25", "<=5", ">=75"), got ${JSON.stringify(row.percentile)}`
				});
			}
			return;
		}
		const label = SCALES[spec.scale].label;
		const [blo, bhi] = spec.bounds ?? SCALES[spec.scale].bounds;
		if (row.score === undefined || row.score === null) problems.push({ path: ['rows', i, 'score'], message: `required on a ${label} table` });
		else if (typeof row.score !== 'number' || !Number.isInteger(row.score)) problems.push({ path: ['rows', i, 'score'], message: 'expected a whole number' });
		else if (row.score < blo || row.score > bhi)
			problems.push({ path: ['rows', i, 'score'], message: `${label} ${row.score} is outside the scale's bounds ${blo}–${bhi}` });
		const has = row.percentile !== undefined && row.percentile !== null;
		if (has !== withPct) {
			problems.push({
				path: ['rows', i, 'percentile'],
				message: `a table gives percentiles on every row or on none (rows[0] ${withPct ? 'has one' : 'has none'})`
			});
		} else if (has && !validTablePercentile(row.percentile, false)) {
			problems.push({ path: ['rows', i, 'percentile'], message: `expected a whole number 1–99, "<1" or ">99", got ${JSON.stringify(row.percentile)}` });
		}
	});
	return problems;
}
