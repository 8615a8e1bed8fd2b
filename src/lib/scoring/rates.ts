/**
 * Error rates with Wilson score intervals.
 *
 * Pure TypeScript: no framework, database or Node imports, so it runs in the browser too.
 * Formulas and sources: see AGREEMENT.md beside this file.
 */

/** The two-sided 95% normal quantile, Φ⁻¹(0.975), to double precision. */
export const Z_95 = 1.959963984540054;

export interface WilsonInterval {
	/** Number of events counted (e.g. errors). */
	successes: number;
	/** Number of opportunities (e.g. fields entered). */
	trials: number;
	/** successes / trials. */
	proportion: number;
	/** Lower Wilson score limit, a proportion in [0, 1]. */
	lower: number;
	/** Upper Wilson score limit, a proportion in [0, 1]. */
	upper: number;
	/** The normal quantile used (1.959963984540054 for 95%). */
	z: number;
	/** The same three figures scaled per 100 trials (errors per 100 fields). */
	per100: { rate: number; lower: number; upper: number };
}

function assertCount(value: number, name: string): void {
	if (!Number.isInteger(value) || value < 0) {
		throw new RangeError(`${name}: expected a non-negative integer, got ${String(value)}`);
	}
}

/**
 * Wilson (1927) score interval for a binomial proportion, without continuity correction
 * (Newcombe 1998, method 3):
 *
 *   centre    = (p̂ + z²/2n) / (1 + z²/n)
 *   halfWidth = z · √(p̂(1 − p̂)/n + z²/4n²) / (1 + z²/n)
 *
 * Returns null when there are no trials (no rate exists), and throws a RangeError when the
 * counts are not non-negative integers or successes > trials. The limits are clamped to
 * [0, 1] only to remove floating-point noise; mathematically they never leave that range.
 */
export function wilsonInterval(successes: number, trials: number, options: { z?: number } = {}): WilsonInterval | null {
	assertCount(successes, 'successes');
	assertCount(trials, 'trials');
	if (successes > trials) {
		throw new RangeError(`successes (${successes}) exceed trials (${trials})`);
	}
	const z = options.z ?? Z_95;
	if (!Number.isFinite(z) || z <= 0) throw new RangeError(`z: expected a positive number`);
	if (trials === 0) return null;

	const n = trials;
	const p = successes / n;
	const z2 = z * z;
	const denominator = 1 + z2 / n;
	const centre = (p + z2 / (2 * n)) / denominator;
	const halfWidth = (z * Math.sqrt((p * (1 - p)) / n + z2 / (4 * n * n))) / denominator;
	// Exact at the ends: with no events the lower limit is 0, with all events the upper is 1.
	const lower = successes === 0 ? 0 : Math.max(0, centre - halfWidth);
	const upper = successes === n ? 1 : Math.min(1, centre + halfWidth);
	return {
		successes,
		trials,
		proportion: p,
		lower,
		upper,
		z,
		per100: { rate: 100 * p, lower: 100 * lower, upper: 100 * upper }
	};
}

/**
 * Errors per 100 fields with its Wilson interval: a thin, explicitly named wrapper over
 * {@link wilsonInterval} for the audit tables. Null when no fields were entered.
 */
export function errorRatePer100(errors: number, fields: number, options: { z?: number } = {}) {
	return wilsonInterval(errors, fields, options);
}
