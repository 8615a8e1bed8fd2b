/**
 * Score scales, rounding and the recomputation of derived scores from a raw score.
 * Pure TypeScript: runs on the server, in the worker, in the batch command and in the browser.
 */
import jStat from 'jstat';

export type DerivedField = 'z' | 'standard' | 'scaled' | 't' | 'percentile';
export type Field = 'raw' | DerivedField;
export type Direction = 'higher_better' | 'lower_better';
export type Bounds = readonly [number, number];
export type BoundsOverride = Partial<Record<DerivedField, Bounds>>;

/** Field order used everywhere: comparisons, discrepancy order, tables. */
export const FIELDS: readonly Field[] = ['raw', 'z', 'standard', 'scaled', 't', 'percentile'];
export const DERIVED_FIELDS: readonly DerivedField[] = ['z', 'standard', 'scaled', 't', 'percentile'];

export interface ScaleDef {
	field: DerivedField;
	/** Mean and SD of the scale (percentile has none: it comes from the normal CDF). */
	mean: number | null;
	sd: number | null;
	/** Default valid range, inclusive, except percentile which is exclusive (above 0, below 100). */
	bounds: Bounds;
	/** Decimals the reference is written with. */
	decimals: number;
	label: string;
}

export const SCALES: Readonly<Record<DerivedField, ScaleDef>> = {
	z: { field: 'z', mean: 0, sd: 1, bounds: [-5, 5], decimals: 2, label: 'z-score' },
	standard: { field: 'standard', mean: 100, sd: 15, bounds: [40, 160], decimals: 0, label: 'standard score' },
	scaled: { field: 'scaled', mean: 10, sd: 3, bounds: [1, 19], decimals: 0, label: 'scaled score' },
	t: { field: 't', mean: 50, sd: 10, bounds: [20, 80], decimals: 0, label: 'T-score' },
	percentile: { field: 'percentile', mean: null, sd: null, bounds: [0, 100], decimals: 0, label: 'percentile' }
};

/** Percentile references are clamped to this range (the spec: "clamped to 1–99"). */
export const PERCENTILE_CLAMP: Bounds = [1, 99];

const TIE_TOLERANCE = 1e-9;

/**
 * R: round half away from zero; a value within 1e-9 of a .5 boundary counts as on it,
 * so 122.49999999999997 (what 100 + 15 * 1.5 can come out as in floating point) rounds to 123.
 */
export function roundHalfAway(x: number): number {
	if (x < 0) return -Math.floor(-x + 0.5 + TIE_TOLERANCE);
	return Math.floor(x + 0.5 + TIE_TOLERANCE);
}

/** R at a number of decimals: R(x · 10^d) / 10^d. */
export function roundTo(x: number, decimals: number): number {
	if (decimals === 0) return roundHalfAway(x);
	const f = 10 ** decimals;
	return roundHalfAway(x * f) / f;
}

/** Floor and ceiling at a number of decimals, tolerant of floating-point noise (1e-9 in scaled units). */
export function floorTo(x: number, decimals: number): number {
	const f = 10 ** decimals;
	return Math.floor(x * f + TIE_TOLERANCE) / f;
}
export function ceilTo(x: number, decimals: number): number {
	const f = 10 ** decimals;
	return Math.ceil(x * f - TIE_TOLERANCE) / f;
}

export function clamp(x: number, [lo, hi]: Bounds): number {
	return x < lo ? lo : x > hi ? hi : x;
}

/** Standard normal CDF Φ (jstat). */
export function normalCdf(z: number): number {
	return jStat.normal.cdf(z, 0, 1);
}

/** Standard normal quantile Φ⁻¹ (jstat). */
export function normalInv(p: number): number {
	return jStat.normal.inv(p, 0, 1);
}

/** The bounds in force for a field on a test: the test's override or the scale default. */
export function boundsFor(field: DerivedField, override?: BoundsOverride | null): Bounds {
	return override?.[field] ?? SCALES[field].bounds;
}

/** Whether a numeric value lies inside a derived field's valid range (percentile: strictly between). */
export function inBounds(field: DerivedField, value: number, override?: BoundsOverride | null): boolean {
	const [lo, hi] = boundsFor(field, override);
	if (field === 'percentile' && !override?.percentile) return value > lo && value < hi;
	return value >= lo && value <= hi;
}

/** z = (raw − mean) / SD, sign reversed when lower raw scores are better. Unrounded. */
export function zFromRaw(raw: number, mean: number, sd: number, direction: Direction): number {
	const z = (raw - mean) / sd;
	return direction === 'lower_better' ? -z : z;
}

/** The unrounded, unclamped value of a scale at z (percentile: 100·Φ(z)). */
export function unroundedScore(field: DerivedField, z: number): number {
	switch (field) {
		case 'z':
			return z;
		case 'standard':
			return 100 + 15 * z;
		case 'scaled':
			return 10 + 3 * z;
		case 't':
			return 50 + 10 * z;
		case 'percentile':
			return 100 * normalCdf(z);
	}
}

/**
 * The reference value of a derived field from the unrounded z, exactly as the spec's table says:
 * z rounded to 2 decimals (not clamped); standard, scaled, T rounded and clamped to the bounds;
 * percentile rounded and clamped to 1–99 (or to the test's percentile bounds when it overrides them).
 */
export function referenceScore(field: DerivedField, z: number, override?: BoundsOverride | null): number {
	switch (field) {
		case 'z':
			return roundTo(z, 2);
		case 'standard':
			return clamp(roundHalfAway(100 + 15 * z), override?.standard ?? SCALES.standard.bounds);
		case 'scaled':
			return clamp(roundHalfAway(10 + 3 * z), override?.scaled ?? SCALES.scaled.bounds);
		case 't':
			return clamp(roundHalfAway(50 + 10 * z), override?.t ?? SCALES.t.bounds);
		case 'percentile':
			return clamp(roundHalfAway(100 * normalCdf(z)), override?.percentile ?? PERCENTILE_CLAMP);
	}
}

/** All derived references at once. */
export function referenceScores(z: number, override?: BoundsOverride | null): Record<DerivedField, number> {
	return {
		z: referenceScore('z', z, override),
		standard: referenceScore('standard', z, override),
		scaled: referenceScore('scaled', z, override),
		t: referenceScore('t', z, override),
		percentile: referenceScore('percentile', z, override)
	};
}

/**
 * A reference written at its field's precision, for the digit kinds and for storage: z as `1.07` /
 * `-0.30`, other scales (and composite sums) whole; a percentile band (a string) as it is.
 */
export function formatReference(field: DerivedField | 'sum', value: number | string): string {
	if (typeof value === 'string') return value;
	return field === 'z' ? value.toFixed(2) : String(value);
}

/** An entered value, as it arrives: a JSON number, a string as typed, or empty. */
export type Entered = number | string | null | undefined;

const NUMERIC = /^[+-]?(?:\d+\.?\d*|\.\d+)$/;

/**
 * Read an entered value. Returns `null` for empty (null, undefined, "" or only spaces), NaN for text
 * that is not a number written in digits, else the number. Accepts a leading `+`, the Unicode minus
 * sign, and for percentiles `<1` and `>99` (read as 1 and 99; other `<`/`>` forms are not numbers).
 * Exponents, hex and `Infinity` are not numbers here, though JavaScript's Number() would take them.
 */
export function parseEntered(v: Entered, field?: Field): number | null {
	if (v === null || v === undefined) return null;
	if (typeof v === 'number') return Number.isFinite(v) ? v : NaN;
	let s = v.trim();
	if (s === '') return null;
	if (field === 'percentile') {
		if (s === '<1') return 1;
		if (s === '>99') return 99;
	}
	if (s.charCodeAt(0) === 0x2212) s = '-' + s.slice(1);
	return NUMERIC.test(s) ? Number(s) : NaN;
}

/**
 * A number typed with a decimal comma ("12,5", "−0,8"). It is not accepted as a number: a comma is a
 * decimal mark in some places and a thousands separator in others ("1,250" ms could be 1.25 or
 * 1250), the digit kinds compare values as written, and a score must never be silently misread. So
 * such a value stays "not a number" (a discrepancy if submitted), and the message says what to type.
 */
export function hasDecimalComma(v: Entered): boolean {
	if (typeof v !== 'string') return false;
	return /^[+\-\u2212]?\d*,\d+$/.test(v.trim());
}

/** The message for a decimal comma (see hasDecimalComma). */
export const DECIMAL_COMMA_MESSAGE = 'Use a decimal point, not a comma (12.5, not 12,5).';

/** The message for a value that is not a number written in digits (the decimal comma named). */
export function notANumberMessage(v: Entered): string {
	return hasDecimalComma(v) ? DECIMAL_COMMA_MESSAGE : 'Enter a number written in digits.';
}

/**
 * The value as written, for the digit kinds: a string keeps its digits (trimmed, Unicode minus as `-`,
 * `<1`/`>99` as `1`/`99`), a number as JavaScript prints it.
 */
export function writtenForm(v: Entered): string {
	if (v === null || v === undefined) return '';
	if (typeof v === 'number') return String(v);
	let s = v.trim();
	if (s === '<1') return '1';
	if (s === '>99') return '99';
	if (s.charCodeAt(0) === 0x2212) s = '-' + s.slice(1);
	return s;
}

/** Decimals of a number as it would be written without trailing zeros (36.20 → 1). */
export function decimalsOf(x: number): number {
	if (Number.isInteger(x)) return 0;
	const s = String(x);
	const e = s.indexOf('e');
	if (e >= 0) {
		// e.g. 1e-7: fall back on a bounded search
		for (let d = 1; d <= 20; d++) if (Math.abs(roundTo(x, d) - x) < 1e-12) return d;
		return 20;
	}
	const dot = s.indexOf('.');
	return dot < 0 ? 0 : s.length - dot - 1;
}

/** Whether a raw score fits the test: inside min–max and at most `decimals` decimals (within 1e-9). */
export function rawInRange(value: number, raw: { min: number; max: number; decimals: number }): boolean {
	if (!(value >= raw.min && value <= raw.max)) return false;
	const f = 10 ** raw.decimals;
	return Math.abs(value * f - Math.round(value * f)) < 1e-6;
}
