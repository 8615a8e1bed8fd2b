/**
 * Risk-based verification: the statistics behind "sampled" double entry (issue 19).
 *
 *  - wilson(x, n)          Wilson score interval of a binomial proportion (Wilson 1927; method 3 of
 *                          Newcombe 1998, recommended there over the Wald interval).
 *  - clopperPearson(x, n)  the "exact" interval from beta quantiles (Clopper & Pearson 1934;
 *                          Newcombe 1998 method 5).
 *  - qualifies(...)        a scorer qualifies for sampling when, over at least N raw fields of their
 *                          own double-entered work, the Wilson 95% upper bound of their raw-score
 *                          error rate is below T errors per 100 fields.
 *  - undetectedErrors(...) the expected number of raw-score errors left in protocols that got no
 *                          second pass: rate measured on the randomly sampled protocols × the number
 *                          of unsampled raw fields, with the rate's interval scaled by the same count.
 *
 * Formulas, sources and the assumptions they rest on are written in README.md ("Risk-based
 * verification"). Pure: no I/O, runs in the browser too.
 */
import jStat from 'jstat';

/** jstat's beta quantile (its typings omit the beta distribution). */
const betaInv = (p: number, a: number, b: number): number => (jStat as unknown as { beta: { inv(p: number, a: number, b: number): number } }).beta.inv(p, a, b);

/** Φ⁻¹(0.975), the two-sided 95% normal quantile. */
export const Z95 = 1.959963984540054;

export interface Interval {
	/** x / n (0 when n = 0). */
	estimate: number;
	lower: number;
	upper: number;
}

function check(x: number, n: number) {
	if (!Number.isInteger(x) || !Number.isInteger(n) || x < 0 || n < 0 || x > n) throw new RangeError(`need whole numbers 0 ≤ x ≤ n (got x=${x}, n=${n})`);
}

/**
 * Wilson score interval: the p for which |x − np| ≤ z·√(np(1−p)), i.e.
 *   centre = (x + z²/2) / (n + z²),   half-width = z/(n + z²) · √(x(n−x)/n + z²/4).
 * With n = 0 nothing is known: [0, 1].
 */
export function wilson(x: number, n: number, z = Z95): Interval {
	check(x, n);
	if (n === 0) return { estimate: 0, lower: 0, upper: 1 };
	const z2 = z * z;
	const centre = (x + z2 / 2) / (n + z2);
	const half = (z / (n + z2)) * Math.sqrt((x * (n - x)) / n + z2 / 4);
	return { estimate: x / n, lower: Math.max(0, centre - half), upper: Math.min(1, centre + half) };
}

/**
 * Clopper–Pearson interval at level 1 − α: lower = B(α/2; x, n−x+1), upper = B(1−α/2; x+1, n−x),
 * B the beta quantile; lower = 0 when x = 0, upper = 1 when x = n.
 */
export function clopperPearson(x: number, n: number, alpha = 0.05): Interval {
	check(x, n);
	if (n === 0) return { estimate: 0, lower: 0, upper: 1 };
	const lower = x === 0 ? 0 : betaInv(alpha / 2, x, n - x + 1);
	const upper = x === n ? 1 : betaInv(1 - alpha / 2, x + 1, n - x);
	return { estimate: x / n, lower, upper };
}

export interface SamplingPolicy {
	mode: 'every' | 'sampled';
	/** Minimum raw fields of double-entered work before a scorer can qualify (default 2,000). */
	minFields: number;
	/** Only work from the last `windowDays` days counts. */
	windowDays: number;
	/** Threshold T in raw-score errors per 100 fields. */
	thresholdPer100: number;
	/** Probability that a qualified scorer's protocol gets a second pass (0 < p ≤ 1). */
	probability: number;
}

export const DEFAULT_POLICY: SamplingPolicy = { mode: 'every', minFields: 2000, windowDays: 180, thresholdPer100: 0.5, probability: 0.25 };

export interface Qualification {
	qualifies: boolean;
	fields: number;
	errors: number;
	/** Wilson 95% interval of the raw-score error rate, per 100 fields. */
	ratePer100: number;
	lowerPer100: number;
	upperPer100: number;
	/** Why not, in words (null when the scorer qualifies). */
	reason: string | null;
}

/** The qualification rule: at least N fields, and the Wilson 95% upper bound strictly below T. */
export function qualifies(errors: number, fields: number, policy: Pick<SamplingPolicy, 'minFields' | 'thresholdPer100'>): Qualification {
	const w = wilson(errors, fields);
	const base = { fields, errors, ratePer100: w.estimate * 100, lowerPer100: w.lower * 100, upperPer100: w.upper * 100 };
	if (fields < policy.minFields) return { ...base, qualifies: false, reason: `${fields} of the ${policy.minFields} double-entered raw fields needed` };
	if (!(w.upper * 100 < policy.thresholdPer100))
		return { ...base, qualifies: false, reason: `upper bound ${(w.upper * 100).toFixed(3)} per 100 is not below ${policy.thresholdPer100}` };
	return { ...base, qualifies: true, reason: null };
}

/** A sampled protocol's own raw-score error rate (per 100 raw fields) is above T: back to full double entry. */
export function protocolAboveThreshold(errors: number, rawFields: number, thresholdPer100: number): boolean {
	if (errors <= 0) return false;
	if (rawFields <= 0) return true;
	return (errors / rawFields) * 100 > thresholdPer100;
}

export interface UndetectedEstimate {
	/** Raw-score errors found in the sampled (second-pass) protocols, and their raw fields. */
	sampledErrors: number;
	sampledFields: number;
	/** Raw fields entered in protocols that got no second pass. */
	unsampledFields: number;
	/** Expected undetected raw-score errors: x/n · U. */
	estimate: number;
	/** 95% interval from the Wilson interval of x/n, scaled by U. */
	wilson: { lower: number; upper: number };
	/** 95% interval from the Clopper–Pearson interval of x/n, scaled by U. */
	clopperPearson: { lower: number; upper: number };
}

/**
 * Undetected raw-score errors in the unsampled protocols. The sampled protocols were chosen at
 * random (probability p at submission), so the raw-score error rate measured on them estimates the
 * rate on the unsampled ones; the expected count there is rate × U (the total of a population
 * estimated from a simple random sample, N·p̂). Multiplying by the fixed U keeps the coverage of
 * the proportion's interval. With no sampled fields yet the rate is unknown: the interval is [0, U].
 */
export function undetectedErrors(sampledErrors: number, sampledFields: number, unsampledFields: number): UndetectedEstimate {
	check(sampledErrors, sampledFields);
	if (!Number.isInteger(unsampledFields) || unsampledFields < 0) throw new RangeError('unsampled fields must be a whole number ≥ 0');
	const w = wilson(sampledErrors, sampledFields);
	const cp = clopperPearson(sampledErrors, sampledFields);
	const U = unsampledFields;
	return {
		sampledErrors,
		sampledFields,
		unsampledFields: U,
		estimate: w.estimate * U,
		wilson: { lower: w.lower * U, upper: w.upper * U },
		clopperPearson: { lower: cp.lower * U, upper: cp.upper * U }
	};
}

/** Validate a policy as a lead enters it; returns messages naming what is wrong. */
export function policyProblems(p: SamplingPolicy): string[] {
	const out: string[] = [];
	if (p.mode !== 'every' && p.mode !== 'sampled') out.push('mode: choose "every protocol double-entered" or "sampled"');
	if (!Number.isInteger(p.minFields) || p.minFields < 100 || p.minFields > 1_000_000) out.push('minFields: a whole number from 100 to 1,000,000');
	if (!Number.isInteger(p.windowDays) || p.windowDays < 7 || p.windowDays > 3650) out.push('windowDays: a whole number of days from 7 to 3,650');
	if (!Number.isFinite(p.thresholdPer100) || p.thresholdPer100 <= 0 || p.thresholdPer100 > 10)
		out.push('thresholdPer100: above 0 and at most 10 errors per 100 fields');
	if (!Number.isFinite(p.probability) || p.probability <= 0 || p.probability > 1) out.push('probability: above 0% and at most 100%');
	return out;
}

/**
 * A single pass checked against the recomputation. The engine compares two passes; given the same
 * pass twice, raw scores never differ (a single pass cannot check its transcription), every wrong
 * derived score comes back once as `both` (the shared-error rule), an impossible raw score as one
 * `both` out_of_range, and an empty field as two `missing` (one per pass). Keep each finding once,
 * as the first pass's.
 */
export function singlePassFindings<D extends { pass: 'first' | 'second' | 'both'; other: unknown; alternative?: unknown }>(result: {
	discrepancies: D[];
	summary: { fields_compared: number; discrepancies: number };
}): { discrepancies: D[]; summary: { fields_compared: number; discrepancies: number } } {
	const discrepancies = result.discrepancies.filter((d) => d.pass !== 'second').map((d) => ({ ...d, pass: 'first' as const, other: null, alternative: null }));
	return { discrepancies, summary: { fields_compared: Math.round(result.summary.fields_compared / 2), discrepancies: discrepancies.length } };
}
