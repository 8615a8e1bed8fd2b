/**
 * Norm forms in the catalog (issue 14; the contract is shared/spec/reconcile.md, "Norm forms" and
 * "Composites"): mean/SD, conversion tables (raw — or a composite's sum — ranges to a score, with an
 * optional percentile column; percentile-only tables with bands), and regression equations over a
 * fixed list of covariates. Pure: the table grid runs these checks as you type, the server runs
 * them again before writing.
 */
import { hasDecimalComma, notANumberMessage } from '../scoring/scales';

export const NORM_FORMS = ['mean_sd', 'table', 'regression'] as const;
export type NormForm = (typeof NORM_FORMS)[number];
export const NORM_FORM_LABELS: Record<NormForm, string> = {
	mean_sd: 'Mean and SD',
	table: 'Conversion table',
	regression: 'Regression equation'
};

export const TABLE_SCALES = ['scaled', 'standard', 't', 'percentile'] as const;
export type TableScale = (typeof TABLE_SCALES)[number];
export const TABLE_SCALE_LABELS: Record<TableScale, string> = {
	scaled: 'Scaled score (10/3)',
	standard: 'Standard score (100/15)',
	t: 'T-score (50/10)',
	percentile: 'Percentile only (bands allowed)'
};

/** The fixed covariate list of regression norms. Sex enters as 1 for female, 0 for male (our coding). */
export const COVARIATES = ['age', 'education', 'sex'] as const;
export type Covariate = (typeof COVARIATES)[number];
export const COVARIATE_LABELS: Record<Covariate, string> = {
	age: 'Age (years)',
	education: 'Years of education',
	sex: 'Sex (female = 1, male = 0)'
};
export type Coefficients = Partial<Record<Covariate, number>>;

export const COVARIATE_AGE = ['whole_years', 'decimal_years'] as const;
export type CovariateAge = (typeof COVARIATE_AGE)[number];
export const COVARIATE_AGE_LABELS: Record<CovariateAge, string> = {
	whole_years: 'whole years (age 46;11 is 46)',
	decimal_years: 'decimal years (days since birth ÷ 365.25, two decimals)'
};

/** Default bounds of the scales a table may give (reconcile.md, Scales). */
export const SCALE_BOUNDS: Record<'scaled' | 'standard' | 't', [number, number]> = {
	scaled: [1, 19],
	standard: [40, 160],
	t: [20, 80]
};

export interface TableRowInput {
	lo: number;
	hi: number;
	score: number | null;
	percentile: string | null;
}

export interface RawSpan {
	min: number;
	max: number;
	decimals: number;
}

// ---------------------------------------------------------------------------------------------
// Percentiles and bands as the manual prints them

/** Spaces dropped; an en or em dash reads as "-", ≤/≥ as <=/>=. */
export function normalizePercentile(s: string): string {
	return s
		.replace(/\s+/g, '')
		.replace(/[\u2013\u2014\u2212]/g, '-')
		.replace(/\u2264/g, '<=')
		.replace(/\u2265/g, '>=');
}

export type PercentileCell = { kind: 'number'; value: number } | { kind: 'band'; lo: number | null; hi: number | null; text: string };

/** A percentile cell: a whole number 1–99, "<1", ">99", or a band "a-b", "<=a", ">=b" (1 ≤ a < b ≤ 99). */
export function parsePercentile(s: string, allowBands: boolean): PercentileCell | string {
	const t = normalizePercentile(s);
	if (t === '<1') return { kind: 'number', value: 1 };
	if (t === '>99') return { kind: 'number', value: 99 };
	if (/^\d+$/.test(t)) {
		const n = Number(t);
		if (n < 1 || n > 99) return `percentile ${s} is outside 1–99 (write "<1" or ">99")`;
		return { kind: 'number', value: n };
	}
	let m = /^(\d+)-(\d+)$/.exec(t);
	if (m) {
		if (!allowBands) return `percentile band "${s}" is allowed only in a percentile-only table`;
		const a = Number(m[1]);
		const b = Number(m[2]);
		if (!(a >= 1 && a < b && b <= 99)) return `percentile band "${s}": need 1 ≤ a < b ≤ 99`;
		return { kind: 'band', lo: a, hi: b, text: `${a}-${b}` };
	}
	m = /^(<=|>=)(\d+)$/.exec(t);
	if (m) {
		if (!allowBands) return `percentile band "${s}" is allowed only in a percentile-only table`;
		const n = Number(m[2]);
		if (n < 1 || n > 99) return `percentile band "${s}": the bound must lie within 1–99`;
		return m[1] === '<=' ? { kind: 'band', lo: null, hi: n, text: `<=${n}` } : { kind: 'band', lo: n, hi: null, text: `>=${n}` };
	}
	if (hasDecimalComma(t)) return `"${s}" has a decimal comma: a percentile is a whole number 1–99`;
	return `"${s}" is not a percentile (a whole number 1–99, "<1", ">99"${allowBands ? ', or a band such as "5-9", "<=2", ">=75"' : ''})`;
}

/** Is this entered text a percentile band (not a single percentile)? */
export function isBand(s: string | null | undefined): boolean {
	if (!s) return false;
	const t = normalizePercentile(s);
	return /^\d+-\d+$/.test(t) || /^(<=|>=)\d+$/.test(t);
}

/** A band in words for the Summary: "5th–9th", "at or below the 2nd", "at or above the 75th". */
export function bandWords(s: string): string {
	const p = parsePercentile(s, true);
	const ord = (n: number) => `${n}${n % 100 >= 11 && n % 100 <= 13 ? 'th' : (['th', 'st', 'nd', 'rd'][n % 10] ?? 'th')}`;
	if (typeof p === 'string') return s;
	if (p.kind === 'number') return ord(p.value);
	if (p.lo !== null && p.hi !== null) return `${ord(p.lo)}–${ord(p.hi)}`;
	if (p.hi !== null) return `at or below the ${ord(p.hi)}`;
	return `at or above the ${ord(p.lo!)}`;
}

// ---------------------------------------------------------------------------------------------
// Tables: coverage (gap, overlap, out of scale) named by row

export interface TableProblem {
	/** 1-based row of the table (as the grid numbers it). */
	row: number;
	column: 'lo' | 'hi' | 'score' | 'percentile' | null;
	kind: 'gap' | 'overlap' | 'order' | 'out_of_span' | 'precision' | 'out_of_scale' | 'score_missing' | 'percentile' | 'percentile_mixed' | 'empty';
	message: string;
}

const fmtRaw = (x: number, decimals: number) => x.toFixed(decimals);
/** Integer ticks at the span's precision (3.5 then 3.6 is one step, whatever floating point says). */
const ticks = (x: number, decimals: number) => Math.round(x * 10 ** decimals);
const onGrid = (x: number, decimals: number) => Math.abs(x * 10 ** decimals - Math.round(x * 10 ** decimals)) < 1e-6;

/**
 * Problems of a conversion table against the span it must cover: every valid raw value (or sum)
 * exactly once, rows ascending, each `lo` the previous `hi` plus one step; scores whole and within
 * the scale's bounds; percentile on every row or none (every row, for a percentile-only table).
 * `what` names the keyed value in messages ("raw" or "sum").
 */
export function tableProblems(
	rows: readonly TableRowInput[],
	span: RawSpan,
	scale: TableScale,
	bounds: [number, number] | null = null,
	what: 'raw' | 'sum' = 'raw'
): TableProblem[] {
	const out: TableProblem[] = [];
	if (rows.length === 0) return [{ row: 0, column: null, kind: 'empty', message: 'The table has no rows.' }];
	const d = span.decimals;
	const step = 10 ** -d;
	const [bLo, bHi] = scale === 'percentile' ? [1, 99] : (bounds ?? SCALE_BOUNDS[scale]);
	let prev: TableRowInput | null = null;
	rows.forEach((r, i) => {
		const n = i + 1;
		const okLo = Number.isFinite(r.lo);
		const okHi = Number.isFinite(r.hi);
		if (!okLo) out.push({ row: n, column: 'lo', kind: 'precision', message: `Row ${n}: the ${what} range has no lower value.` });
		if (!okHi) out.push({ row: n, column: 'hi', kind: 'precision', message: `Row ${n}: the ${what} range has no upper value.` });
		if (okLo && okHi) {
			for (const [col, x] of [
				['lo', r.lo],
				['hi', r.hi]
			] as const) {
				if (!onGrid(x, d))
					out.push({ row: n, column: col, kind: 'precision', message: `Row ${n}: ${x} has more decimals than the ${what} score allows (${d}).` });
				else if (x < span.min - 1e-9 || x > span.max + 1e-9)
					out.push({
						row: n,
						column: col,
						kind: 'out_of_span',
						message: `Row ${n}: ${what} ${fmtRaw(x, d)} is outside ${fmtRaw(span.min, d)}–${fmtRaw(span.max, d)}.`
					});
			}
			if (r.lo > r.hi + 1e-9)
				out.push({ row: n, column: 'hi', kind: 'order', message: `Row ${n}: the range ${fmtRaw(r.lo, d)}–${fmtRaw(r.hi, d)} is reversed.` });
			if (prev === null) {
				if (ticks(r.lo, d) > ticks(span.min, d))
					out.push({
						row: n,
						column: 'lo',
						kind: 'gap',
						message: `Row ${n}: gap — nothing covers ${what} ${fmtRaw(span.min, d)}–${fmtRaw(r.lo - step, d)} before this row.`
					});
			} else if (Number.isFinite(prev.hi)) {
				const expected = ticks(prev.hi, d) + 1;
				const got = ticks(r.lo, d);
				if (got > expected)
					out.push({
						row: n,
						column: 'lo',
						kind: 'gap',
						message: `Row ${n}: gap — nothing covers ${what} ${fmtRaw(prev.hi + step, d)}–${fmtRaw(r.lo - step, d)} between rows ${n - 1} and ${n}.`
					});
				else if (got < expected)
					out.push({
						row: n,
						column: 'lo',
						kind: 'overlap',
						message: `Row ${n}: overlap — ${what} ${fmtRaw(r.lo, d)}–${fmtRaw(Math.min(prev.hi, r.hi), d)} is also in row ${n - 1}.`
					});
			}
			if (i === rows.length - 1 && ticks(r.hi, d) < ticks(span.max, d))
				out.push({
					row: n,
					column: 'hi',
					kind: 'gap',
					message: `Row ${n}: gap — nothing covers ${what} ${fmtRaw(r.hi + step, d)}–${fmtRaw(span.max, d)} after the last row.`
				});
		}
		if (scale !== 'percentile') {
			if (r.score === null || r.score === undefined || !Number.isFinite(r.score))
				out.push({ row: n, column: 'score', kind: 'score_missing', message: `Row ${n}: no score.` });
			else if (!Number.isInteger(r.score))
				out.push({ row: n, column: 'score', kind: 'out_of_scale', message: `Row ${n}: score ${r.score} is not a whole number.` });
			else if (r.score < bLo || r.score > bHi)
				out.push({
					row: n,
					column: 'score',
					kind: 'out_of_scale',
					message: `Row ${n}: score ${r.score} is outside the ${scale === 't' ? 'T' : scale} scale's ${bLo}–${bHi}.`
				});
		}
		if (r.percentile !== null && r.percentile !== undefined && r.percentile.trim() !== '') {
			const p = parsePercentile(r.percentile, scale === 'percentile');
			if (typeof p === 'string') out.push({ row: n, column: 'percentile', kind: 'percentile', message: `Row ${n}: ${p}.` });
		} else if (scale === 'percentile')
			out.push({ row: n, column: 'percentile', kind: 'percentile', message: `Row ${n}: a percentile-only table needs a percentile on every row.` });
		prev = okHi ? r : prev;
	});
	if (scale !== 'percentile') {
		const withP = rows.filter((r) => r.percentile !== null && r.percentile !== undefined && r.percentile.trim() !== '').length;
		if (withP > 0 && withP < rows.length) {
			const first = rows.findIndex((r) => !r.percentile || r.percentile.trim() === '') + 1;
			out.push({
				row: first,
				column: 'percentile',
				kind: 'percentile_mixed',
				message: `Row ${first}: give a percentile on every row or on none (${withP} of ${rows.length} rows have one).`
			});
		}
	}
	return out.sort((a, b) => a.row - b.row);
}

/**
 * Rows pasted from a spreadsheet (tab-separated; commas or semicolons also read): per line either
 * `lo–hi  score  [percentile]` (a range in one cell, as manuals print it) or `lo  hi  score  [percentile]`,
 * or for a percentile-only table `lo–hi  percentile` / `lo  hi  percentile`. A single raw value
 * stands for the range lo = hi. A header line (no digits in the first cell) is skipped.
 */
export function parsePastedRows(text: string, scale: TableScale): { rows: TableRowInput[]; errors: string[] } {
	const rows: TableRowInput[] = [];
	const errors: string[] = [];
	const lines = text.replace(/\r\n?/g, '\n').split('\n');
	lines.forEach((line, i) => {
		if (line.trim() === '') return;
		const cells = (line.includes('\t') ? line.split('\t') : line.split(/[;,]/)).map((c) => c.trim());
		while (cells.length && cells[cells.length - 1] === '') cells.pop();
		if (i === 0 && !/\d/.test(cells[0] ?? '')) return; // header
		let lo: number;
		let hi: number;
		let rest: string[];
		const range = /^([+-]?\d+(?:\.\d+)?)\s*[-\u2013\u2014]\s*([+-]?\d+(?:\.\d+)?)$/.exec(cells[0] ?? '');
		const num = (s: string | undefined) => (s !== undefined && /^[+-]?\d+(\.\d+)?$/.test(s) ? Number(s) : NaN);
		const needs = scale === 'percentile' ? 1 : 1;
		if (range) {
			lo = Number(range[1]);
			hi = Number(range[2]);
			rest = cells.slice(1);
		} else if (cells.length >= 2 + needs && Number.isFinite(num(cells[1])) && (scale !== 'percentile' || cells.length >= 3)) {
			lo = num(cells[0]);
			hi = num(cells[1]);
			rest = cells.slice(2);
		} else {
			lo = hi = num(cells[0]);
			rest = cells.slice(1);
		}
		if (!Number.isFinite(lo) || !Number.isFinite(hi)) {
			errors.push(`Line ${i + 1}: "${cells[0] ?? ''}" is not a raw value or range.`);
			return;
		}
		if (scale === 'percentile') rows.push({ lo, hi, score: null, percentile: rest[0] ?? null });
		else {
			const score = num(rest[0]);
			if (!Number.isFinite(score)) errors.push(`Line ${i + 1}: "${rest[0] ?? ''}" is not a score.`);
			rows.push({ lo, hi, score: Number.isFinite(score) ? score : null, percentile: rest[1] ?? null });
		}
	});
	return { rows, errors };
}

/** The span a composite's sum can take: the parts' lower bounds summed to their upper bounds. */
export function sumSpan(partBounds: readonly [number, number][]): RawSpan {
	return { min: partBounds.reduce((s, b) => s + b[0], 0), max: partBounds.reduce((s, b) => s + b[1], 0), decimals: 0 };
}

/** Age as a regression covariate, as the norm set says: whole years, or decimal years from days. */
export function ageCovariate(rule: CovariateAge, whole: { years: number }, daysSinceBirth: number): number {
	return rule === 'whole_years' ? whole.years : Math.round((daysSinceBirth / 365.25) * 100) / 100;
}

/**
 * Live checks of a composite's sum as a scorer enters it: a whole number within the sums the parts
 * can give, and — the scorer's own arithmetic, never the recomputation — whether it equals the sum
 * of the part scores entered in this same pass (when every part is there).
 */
export function compositeSumProblems(sum: string | null | undefined, parts: readonly (string | null | undefined)[], span: RawSpan): string[] {
	if (sum === null || sum === undefined || sum.trim() === '') return [];
	const t = sum.trim();
	if (!/^[+-]?\d+(\.\d+)?$/.test(t)) return [notANumberMessage(t)];
	const v = Number(t);
	const out: string[] = [];
	if (!Number.isInteger(v)) out.push('A sum of scores is a whole number.');
	else if (v < span.min || v > span.max) out.push(`Sums of these parts run from ${span.min} to ${span.max}.`);
	const nums = parts.map((p) => (p === null || p === undefined || !/^\s*[+-]?\d+(\.\d+)?\s*$/.test(p) ? null : Number(p)));
	if (nums.every((n) => n !== null)) {
		const own = (nums as number[]).reduce((a, b) => a + b, 0);
		if (own !== v) out.push(`The part scores you entered above add up to ${own}.`);
	}
	return out;
}
