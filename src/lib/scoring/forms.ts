/**
 * The arithmetic of the norm forms (shared/spec/reconcile.md, "Norm forms" and "Composites"):
 * a norm entry is compiled once per protocol into a `Scorer` that, for a usable raw score (or a
 * composite sum), gives a point (z or z_eq, table row) and from it each field's reference, the
 * unrounded value (for `rounding`), the sign-flipped reference and the neighbouring rows' references.
 * Pure; no validation here beyond what is needed not to crash (the schema checks tables first).
 */
import { SCALES, referenceScore, unroundedScore, type BoundsOverride, type DerivedField, type Direction } from './scales';
import type { CompositeNormEntry, Covariates, NormEntry, TableScale, TablePercentile } from './norms';

/** A reference: a number, or a percentile band string (percentile-only tables). */
export type Ref = number | string;

/** Where a raw score (or sum) lands: its z (computed, or z_eq from a table score; null on a percentile-only table) and table row. */
export interface Point {
	z: number | null;
	/** Index of the table row that holds the value; -1 for mean/SD and regression norms. */
	row: number;
}

export interface Scorer {
	/** `z` for mean/SD and regression, `table` for a score table, `percentile` for a percentile-only table. */
	readonly kind: 'z' | 'table' | 'percentile';
	/** The point of a usable raw score or sum. */
	at(x: number): Point;
	/** The reference of a field at a point, or undefined when this norm gives none (percentile-only tables). */
	ref(p: Point, f: DerivedField): Ref | undefined;
	/** The unrounded reference, or null when the value is read from a table (then `rounding` never applies). */
	unrounded(p: Point, f: DerivedField): number | null;
	/** The reference with z negated (sign_flip), or undefined where the contract gives none. */
	flipped(p: Point, f: DerivedField): Ref | undefined;
	/** The references of the rows just above and below (adjacent_row); empty for computed norms. */
	adjacent(p: Point, f: DerivedField): Ref[];
}

// ---------------------------------------------------------------- percentile bands

const BAND_RANGE = /^(\d{1,2})-(\d{1,2})$/;
const BAND_LE = /^<=(\d{1,2})$/;
const BAND_GE = /^>=(\d{1,2})$/;

/**
 * Read a percentile band as written: `"a-b"` (1 ≤ a < b ≤ 99), `"<=a"`, `">=b"`; spaces ignored, an
 * en dash read as `-`, `≤`/`≥` as `<=`/`>=`. Returns the band's canonical form (`"10-25"`, `"<=5"`,
 * `">=75"`), or null when the text is not a band (numbers, `"<1"` and `">99"` are not bands).
 */
export function canonicalBand(v: unknown): string | null {
	if (typeof v !== 'string') return null;
	const s = v
		.replace(/\s+/g, '')
		.replace(/\u2013/g, '-')
		.replace(/\u2264/g, '<=')
		.replace(/\u2265/g, '>=');
	let m = BAND_RANGE.exec(s);
	if (m) {
		const a = Number(m[1]);
		const b = Number(m[2]);
		return a >= 1 && a < b && b <= 99 ? `${a}-${b}` : null;
	}
	m = BAND_LE.exec(s);
	if (m) {
		const a = Number(m[1]);
		return a >= 1 && a <= 99 ? `<=${a}` : null;
	}
	m = BAND_GE.exec(s);
	if (m) {
		const b = Number(m[1]);
		return b >= 1 && b <= 99 ? `>=${b}` : null;
	}
	return null;
}

/** A table's percentile as a reference: whole numbers as they are, `"<1"` → 1, `">99"` → 99, a band as written. */
export function tablePercentileRef(p: TablePercentile): Ref {
	if (typeof p === 'number') return p;
	const t = p.trim();
	if (t === '<1') return 1;
	if (t === '>99') return 99;
	const n = Number(t);
	return t !== '' && Number.isFinite(n) ? n : p;
}

// ---------------------------------------------------------------- scorers

/** Mean/SD and regression norms: z = ±(x − center) / sd. A class, so a protocol's scorers share their methods. */
class ZScorer implements Scorer {
	readonly kind = 'z' as const;
	constructor(
		private readonly center: number,
		private readonly sd: number,
		private readonly reversed: boolean,
		private readonly bounds: BoundsOverride | null | undefined
	) {}
	at(x: number): Point {
		const z = (x - this.center) / this.sd;
		return { z: this.reversed ? -z : z, row: -1 };
	}
	ref(p: Point, f: DerivedField): Ref {
		return referenceScore(f, p.z as number, this.bounds);
	}
	unrounded(p: Point, f: DerivedField): number {
		return unroundedScore(f, p.z as number);
	}
	flipped(p: Point, f: DerivedField): Ref {
		return referenceScore(f, -(p.z as number), this.bounds);
	}
	adjacent(): Ref[] {
		return [];
	}
}

interface TableLike {
	scale: TableScale;
	rows: readonly { raw?: readonly [number, number]; sum?: readonly [number, number]; score?: number; percentile?: TablePercentile }[];
}

/**
 * A table scorer over rows keyed by `key` (`raw` or `sum`) at a precision of 10^−decimals. Rows ascend
 * and (after validation) cover the range once; a lookup is a binary search comparing at that precision.
 */
function tableScorer(table: TableLike, key: 'raw' | 'sum', decimals: number, bounds: BoundsOverride | null | undefined): Scorer {
	const f10 = 10 ** decimals;
	const scale = table.scale;
	const rows = table.rows;
	const pctOnly = scale === 'percentile';
	const hasPct = rows.length > 0 && rows[0].percentile !== undefined && rows[0].percentile !== null;
	const mean = pctOnly ? 0 : (SCALES[scale].mean as number);
	const sd = pctOnly ? 1 : (SCALES[scale].sd as number);
	const pointOf = (row: number): Point => ({ z: pctOnly ? null : ((rows[row].score as number) - mean) / sd, row });
	const refAt = (p: Point, f: DerivedField): Ref | undefined => {
		const row = rows[p.row];
		if (pctOnly) return f === 'percentile' ? tablePercentileRef(row.percentile as TablePercentile) : undefined;
		if (f === scale) return row.score as number;
		if (f === 'percentile' && hasPct) return tablePercentileRef(row.percentile as TablePercentile);
		return referenceScore(f, p.z as number, bounds);
	};
	return {
		kind: pctOnly ? 'percentile' : 'table',
		at(x) {
			const k = Math.round(x * f10);
			let lo = 0;
			let hi = rows.length - 1;
			while (lo < hi) {
				const mid = (lo + hi + 1) >> 1;
				if (Math.round((rows[mid][key] as readonly [number, number])[0] * f10) <= k) lo = mid;
				else hi = mid - 1;
			}
			return pointOf(lo);
		},
		ref: refAt,
		unrounded(p, f) {
			if (pctOnly || f === scale || (f === 'percentile' && hasPct)) return null;
			return unroundedScore(f, p.z as number);
		},
		flipped(p, f) {
			if (pctOnly || (f === 'percentile' && hasPct)) return undefined;
			return referenceScore(f, -(p.z as number), bounds);
		},
		adjacent(p, f) {
			const out: Ref[] = [];
			for (const r of [p.row - 1, p.row + 1]) {
				if (r < 0 || r >= rows.length) continue;
				const v = refAt(pointOf(r), f);
				if (v !== undefined) out.push(v);
			}
			return out;
		}
	};
}

/** predicted = intercept + Σ coefficient · covariate; throws (naming the covariate) when one is missing. */
export function regressionPredicted(intercept: number, coefficients: Readonly<Record<string, number>>, covariates: Covariates | null | undefined): number {
	let p = intercept;
	for (const k in coefficients) {
		const x = covariates?.[k];
		if (typeof x !== 'number' || !Number.isFinite(x)) throw new MissingCovariate(k);
		p += coefficients[k] * x;
	}
	return p;
}

export class MissingCovariate extends Error {
	constructor(readonly covariate: string) {
		super(`covariate ${JSON.stringify(covariate)} is missing from protocol.covariates`);
	}
}

/** The scorer of a test's norm entry (any form). */
export function testScorer(
	test: { direction: Direction; raw: { decimals: number }; bounds?: BoundsOverride | null },
	norm: NormEntry,
	covariates?: Covariates | null
): Scorer {
	const dir = test.direction;
	switch (norm.form) {
		case 'regression': {
			return new ZScorer(regressionPredicted(norm.intercept, norm.coefficients, covariates), norm.sd, dir === 'lower_better', test.bounds);
		}
		case 'table':
			return tableScorer(norm, 'raw', test.raw.decimals, test.bounds);
		default:
			// z = (raw − mean)/sd, reversed for lower_better: the same arithmetic as zFromRaw
			return new ZScorer(norm.mean, norm.sd, dir === 'lower_better', test.bounds);
	}
}

/** The scorer of a composite's norm: of the sum, higher sums better, default scale bounds. */
export function compositeScorer(norm: CompositeNormEntry): Scorer {
	if (norm.form === 'table') return tableScorer(norm, 'sum', 0, null);
	return new ZScorer(norm.mean, norm.sd, false, null);
}
