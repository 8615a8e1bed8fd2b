/**
 * Norm forms and composites: the shapes of shared/spec/reconcile.md, sections "Norm forms" and
 * "Composites". Types only here (plus tiny type guards); the arithmetic is in ./forms and ./reconcile.
 *
 * A document's `norms` array holds test norms (`{ test, group, … }`) and composite norms
 * (`{ composite, group, … }`) side by side. Field names are the batch format's (snake_case where the
 * contract says so), so a catalog can hand the engine exactly what it stores.
 */
import type { DerivedField } from './scales';

/** Scales a conversion table can be written on. */
export type TableScale = 'scaled' | 'standard' | 't' | 'percentile';

/** Fields a composite's parts contribute to its sum. */
export type PartField = 'scaled' | 'standard' | 't';

/** Fields of a composite: its sum, and any derived field. */
export type CompositeField = 'sum' | DerivedField;

/** Composite field order (output order within a composite). */
export const COMPOSITE_FIELDS: readonly CompositeField[] = ['sum', 'z', 'standard', 'scaled', 't', 'percentile'];

/**
 * A percentile as a table gives it: a whole number 1–99, `"<1"` or `">99"`; and, on a percentile-only
 * table (`scale: "percentile"`) only, a band `"a-b"` (1 ≤ a < b ≤ 99), `"<=a"` or `">=b"`.
 * Bands are read leniently (spaces ignored, en dash as `-`, `≤`/`≥` as `<=`/`>=`).
 */
export type TablePercentile = number | string;

/** Covariate values a protocol supplies for regression norms: covariate name → number. */
export type Covariates = Readonly<Record<string, number>>;

interface TestNormBase {
	/** Test id (the `id` of a test in the same document). */
	test: string;
	/** Norm group id (the protocol's `group`, or its `groups[testId]`). */
	group: string;
}

/** `mean_sd` (the default when `form` is absent): z = (raw − mean) / sd, sign reversed for lower_better. */
export interface MeanSdNorm extends TestNormBase {
	form?: 'mean_sd';
	mean: number;
	/** Above 0. */
	sd: number;
}

/**
 * `regression`: demographically adjusted norms. predicted = intercept + Σ coefficients[k] · covariates[k],
 * z = (raw − predicted) / sd, sign reversed for lower_better. Every coefficient's covariate must be in
 * `protocol.covariates` (bad input otherwise, for every regression norm of the document, used or not).
 */
export interface RegressionNorm extends TestNormBase {
	form: 'regression';
	intercept: number;
	/** Covariate name → coefficient (e.g. `{ age: -0.15, education: 1.2 }`). */
	coefficients: Readonly<Record<string, number>>;
	/** Residual SD, above 0. */
	sd: number;
}

/**
 * One row of a conversion table: an inclusive range of raw scores (test tables) or of sums
 * (composite tables), with its score and/or percentile.
 * - `score`: a whole number within the scale's bounds; absent on percentile-only tables.
 * - `percentile`: optional on scaled/standard/t tables (on every row or on none; a whole number 1–99,
 *   `"<1"` or `">99"`); required on percentile-only tables, where it may also be a band.
 */
export interface TableRowBase {
	score?: number;
	percentile?: TablePercentile;
}
export interface RawTableRow extends TableRowBase {
	/** [lo, hi], inclusive, at the test's raw precision; lo = previous hi + 10^−decimals. */
	raw: readonly [number, number];
}
export interface SumTableRow extends TableRowBase {
	/** [lo, hi], inclusive whole sums; cover every possible sum of the composite. */
	sum: readonly [number, number];
}

/**
 * `table`: a conversion table from a norms manual. Rows ascend and cover every valid raw value once
 * (first lo = raw.min, last hi = raw.max, no gap, no overlap). The test's direction is already in the
 * table. For scale ≠ percentile the row's score is the reference of its own field and
 * z_eq = (score − scale mean) / scale SD gives the others. For scale `percentile` the test reports
 * `percentile` only and the row's percentile (or band) is the reference.
 */
export interface TableNorm extends TestNormBase {
	form: 'table';
	scale: TableScale;
	rows: readonly RawTableRow[];
}

/** Any norm entry for a test. */
export type NormEntry = MeanSdNorm | RegressionNorm | TableNorm;

/** A composite norm of the sum, `mean_sd` form: z = (sum − mean) / sd (sums are higher-is-better). */
export interface CompositeMeanSdNorm {
	composite: string;
	group: string;
	form?: 'mean_sd';
	mean: number;
	sd: number;
}

/**
 * A composite norm as a sum table: rows keyed by `sum`, covering every possible sum, from the sum of
 * the parts' lower bounds to the sum of their upper bounds on `part_field` (whole numbers).
 */
export interface CompositeTableNorm {
	composite: string;
	group: string;
	form: 'table';
	scale: TableScale;
	rows: readonly SumTableRow[];
}

/** Any norm entry for a composite (no regression form for composites). */
export type CompositeNormEntry = CompositeMeanSdNorm | CompositeTableNorm;

/** Anything that may stand in a document's `norms` array. */
export type AnyNormEntry = NormEntry | CompositeNormEntry;

/**
 * A composite (index score) over part tests of the same document.
 * Ids are unique across tests and composites; every part reports `part_field`.
 * Its group is `protocol.groups[id]` when present, else `protocol.group`.
 * Passes enter it under its id: `{ "memory-index": { "sum": 27, "standard": 120 } }`.
 */
export interface CompositeDef {
	id: string;
	/** Test ids, at least one. */
	parts: readonly string[];
	part_field: PartField;
	/** `sum` and/or derived fields (compared in the order sum, z, standard, scaled, t, percentile). */
	reported: readonly CompositeField[];
}

export function isCompositeNorm(n: AnyNormEntry): n is CompositeNormEntry {
	return (n as CompositeNormEntry).composite !== undefined;
}

export function isTableNorm<N extends AnyNormEntry>(n: N): n is Extract<N, { form: 'table' }> {
	return n.form === 'table';
}

export function isRegressionNorm(n: AnyNormEntry): n is RegressionNorm {
	return n.form === 'regression';
}
