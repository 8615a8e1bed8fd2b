/**
 * Agreement between scorers: Cohen's kappa (unweighted, linear, quadratic), the six
 * Shrout & Fleiss (1979) intraclass correlations, Bland–Altman bias and limits of agreement,
 * percent agreement, and interpretation bands with their sources.
 *
 * Pure TypeScript: no SvelteKit, $env, Sequelize or node:* imports, so the same code runs on
 * the server, in the batch command and in the browser. Formulas, sources and every choice
 * made here are written up in AGREEMENT.md beside this file.
 *
 * Every function validates its arguments and throws {@link AgreementInputError} (with the
 * offending path, e.g. `pairs[3][1]`) rather than returning NaN.
 */

export { wilsonInterval, errorRatePer100, Z_95, type WilsonInterval } from './rates';

/** Thrown for unusable input; `path` names the offending element relative to the arguments. */
export class AgreementInputError extends Error {
	readonly path: string;
	constructor(path: string, message: string) {
		super(`${path}: ${message}`);
		this.name = 'AgreementInputError';
		this.path = path;
	}
}

// ---------------------------------------------------------------------------------------------
// Percent agreement
// ---------------------------------------------------------------------------------------------

export interface PercentAgreement {
	/** Pairs whose two values are identical (===). */
	agreements: number;
	n: number;
	/** agreements / n, in [0, 1]. */
	proportion: number;
	/** 100 · proportion. */
	percent: number;
}

/** Exact agreement: the share of pairs whose two values are identical (strict equality). */
export function percentAgreement(pairs: ReadonlyArray<readonly [string | number, string | number]>): PercentAgreement {
	if (!Array.isArray(pairs)) throw new AgreementInputError('pairs', 'expected an array');
	if (pairs.length === 0) throw new AgreementInputError('pairs', 'expected at least 1 pair');
	let agreements = 0;
	pairs.forEach((pair, i) => {
		if (!Array.isArray(pair) || pair.length !== 2) {
			throw new AgreementInputError(`pairs[${i}]`, 'expected a pair of two values');
		}
		if (pair[0] === pair[1]) agreements++;
	});
	const proportion = agreements / pairs.length;
	return { agreements, n: pairs.length, proportion, percent: 100 * proportion };
}

// ---------------------------------------------------------------------------------------------
// Cohen's kappa
// ---------------------------------------------------------------------------------------------

export type KappaWeights = 'none' | 'linear' | 'quadratic';
export const KAPPA_WEIGHTS: readonly KappaWeights[] = ['none', 'linear', 'quadratic'];

export interface KappaOptions {
	/** Default 'none'. 'linear' and 'quadratic' require `categories`. */
	weights?: KappaWeights;
	/**
	 * The categories in their order. Required for weighted kappa (the weights depend on the
	 * distance between positions). Optional for unweighted kappa, where the order does not
	 * matter: if omitted, the categories are the labels seen, in first-appearance order
	 * (scanning pair by pair, first rater then second). If given, every label must be in it.
	 */
	categories?: readonly string[];
}

export interface KappaResult {
	/** κ = (observed − expected) / (1 − expected); null when expected = 1 (see `undefinedReason`). */
	kappa: number | null;
	/** Observed agreement pₒ; for weighted kappa the weighted agreement Σ wᵢⱼ pᵢⱼ. */
	observed: number;
	/** Chance agreement pₑ; for weighted kappa the weighted agreement Σ wᵢⱼ pᵢ. p.ⱼ. */
	expected: number;
	/** Number of pairs. */
	n: number;
	weights: KappaWeights;
	/** The categories used, in the order used for the weights. */
	categories: string[];
	/** Why kappa is null; null when kappa is a number. */
	undefinedReason: string | null;
}

/**
 * Agreement weight wᵢⱼ between category positions i and j out of q categories
 * (Cohen 1968; Fleiss & Cohen 1973 for the quadratic form):
 *   none:      1 if i = j, else 0
 *   linear:    1 − |i − j| / (q − 1)
 *   quadratic: 1 − (i − j)² / (q − 1)²
 */
export function kappaWeight(weights: KappaWeights, i: number, j: number, q: number): number {
	if (weights === 'none' || q < 2) return i === j ? 1 : 0;
	const d = Math.abs(i - j) / (q - 1);
	return weights === 'linear' ? 1 - d : 1 - d * d;
}

const KAPPA_UNDEFINED = 'chance agreement is 1: both raters gave every pair one and the same category, ' + 'so kappa is 0/0 and undefined';

/**
 * Cohen's kappa for two raters (Cohen 1960), and weighted kappa (Cohen 1968) with linear or
 * quadratic agreement weights. With pᵢⱼ the share of pairs rated (i, j), pᵢ. and p.ⱼ the two
 * raters' marginal shares and wᵢⱼ from {@link kappaWeight}:
 *
 *   observed = Σᵢⱼ wᵢⱼ pᵢⱼ       expected = Σᵢⱼ wᵢⱼ pᵢ. p.ⱼ
 *   κ = (observed − expected) / (1 − expected)
 *
 * which equals the disagreement form 1 − Σ vᵢⱼ pᵢⱼ / Σ vᵢⱼ pᵢ. p.ⱼ with vᵢⱼ = 1 − wᵢⱼ.
 * Unweighted kappa is the special case wᵢⱼ = [i = j].
 */
export function cohenKappa(pairs: ReadonlyArray<readonly [string, string]>, options: KappaOptions = {}): KappaResult {
	if (!Array.isArray(pairs)) throw new AgreementInputError('pairs', 'expected an array');
	pairs.forEach((pair, i) => {
		if (!Array.isArray(pair) || pair.length !== 2) {
			throw new AgreementInputError(`pairs[${i}]`, 'expected a pair of two labels');
		}
	});
	return kappaOfCells(pairs, (pair) => [pair[0], pair[1], 1], 'pairs', options);
}

/**
 * {@link cohenKappa} from a contingency table instead of a list of pairs: each cell is
 * [first label, second label, number of pairs] (a label pair may appear in several cells; cells of
 * 0 pairs are skipped). The same result, to the last bit, as `cohenKappa` on the list that repeats
 * each cell's pair `count` times in cell order: the counts are whole numbers, so every sum is the
 * same. For the Audit's agreement reports, whose summaries hold counts per label pair.
 */
export function cohenKappaFromCounts(cells: ReadonlyArray<readonly [string, string, number]>, options: KappaOptions = {}): KappaResult {
	if (!Array.isArray(cells)) throw new AgreementInputError('cells', 'expected an array');
	cells.forEach((cell, i) => {
		if (!Array.isArray(cell) || cell.length !== 3) {
			throw new AgreementInputError(`cells[${i}]`, 'expected [first label, second label, count]');
		}
		if (!Number.isSafeInteger(cell[2]) || cell[2] < 0) throw new AgreementInputError(`cells[${i}][2]`, 'expected a whole number of pairs, 0 or more');
	});
	return kappaOfCells(
		cells.filter((c) => c[2] > 0),
		(cell) => [cell[0], cell[1], cell[2]],
		'cells',
		options
	);
}

/** The arithmetic of cohenKappa over weighted cells (a pair is a cell of count 1); `what` names the argument in errors. */
function kappaOfCells<T>(items: ReadonlyArray<T>, cell: (item: T) => [unknown, unknown, number], what: string, options: KappaOptions): KappaResult {
	const weights = options.weights ?? 'none';
	if (!KAPPA_WEIGHTS.includes(weights)) {
		throw new AgreementInputError('weights', 'expected "none", "linear" or "quadratic"');
	}
	if (items.length === 0) throw new AgreementInputError(what, `expected at least 1 ${what === 'pairs' ? 'pair' : 'pair in the cells'}`);
	const cells = items.map(cell);
	cells.forEach((c, i) => {
		for (const j of [0, 1] as const) {
			if (typeof c[j] !== 'string') {
				throw new AgreementInputError(`${what}[${i}][${j}]`, 'expected a string');
			}
		}
	});
	const labelled = cells as Array<[string, string, number]>;

	// The category list and each label's position in it.
	const index = new Map<string, number>();
	let categories: string[];
	if (options.categories !== undefined) {
		if (!Array.isArray(options.categories)) {
			throw new AgreementInputError('categories', 'expected an array of strings');
		}
		categories = [...options.categories];
		categories.forEach((c, i) => {
			if (typeof c !== 'string') throw new AgreementInputError(`categories[${i}]`, 'expected a string');
			if (index.has(c)) throw new AgreementInputError(`categories[${i}]`, `duplicate category "${c}"`);
			index.set(c, i);
		});
		if (weights !== 'none' && categories.length < 2) {
			throw new AgreementInputError('categories', 'weighted kappa needs at least 2 categories');
		}
		labelled.forEach((c, i) => {
			for (const j of [0, 1] as const) {
				if (!index.has(c[j])) {
					throw new AgreementInputError(`${what}[${i}][${j}]`, `label "${c[j]}" is not in categories`);
				}
			}
		});
	} else {
		if (weights !== 'none') {
			throw new AgreementInputError('categories', `required with ${weights} weights (they need the order)`);
		}
		categories = [];
		for (const c of labelled) {
			for (const label of [c[0], c[1]]) {
				if (!index.has(label)) {
					index.set(label, categories.length);
					categories.push(label);
				}
			}
		}
	}

	const q = categories.length;
	let n = 0;
	const counts = Array.from({ length: q }, () => new Array<number>(q).fill(0));
	const rows = new Array<number>(q).fill(0);
	const cols = new Array<number>(q).fill(0);
	for (const [a, b, c] of labelled) {
		const i = index.get(a)!;
		const j = index.get(b)!;
		counts[i][j] += c;
		rows[i] += c;
		cols[j] += c;
		n += c;
	}

	// Sum integer-weighted counts first and divide once, so that perfect agreement gives
	// observed = 1 exactly.
	let observedSum = 0;
	let expectedSum = 0;
	for (let i = 0; i < q; i++) {
		for (let j = 0; j < q; j++) {
			const w = kappaWeight(weights, i, j, q);
			if (w === 0) continue;
			observedSum += w * counts[i][j];
			expectedSum += w * rows[i] * cols[j];
		}
	}
	const observed = observedSum / n;
	const expected = expectedSum / (n * n);

	// expected = 1 only when every pair is (c, c) for a single category c: then observed = 1
	// too and kappa is 0/0. We return null rather than 1 (see AGREEMENT.md).
	if (1 - expected <= 1e-12) {
		return { kappa: null, observed, expected, n, weights, categories, undefinedReason: KAPPA_UNDEFINED };
	}
	const kappa = observed === 1 ? 1 : (observed - expected) / (1 - expected);
	return { kappa, observed, expected, n, weights, categories, undefinedReason: null };
}

// ---------------------------------------------------------------------------------------------
// Intraclass correlation (Shrout & Fleiss 1979)
// ---------------------------------------------------------------------------------------------

export type IccForm = 'ICC(1,1)' | 'ICC(2,1)' | 'ICC(3,1)' | 'ICC(1,k)' | 'ICC(2,k)' | 'ICC(3,k)';
export const ICC_FORMS: readonly IccForm[] = ['ICC(1,1)', 'ICC(2,1)', 'ICC(3,1)', 'ICC(1,k)', 'ICC(2,k)', 'ICC(3,k)'];

export interface IccMeanSquares {
	/** Between-targets mean square, df n − 1. */
	bms: number;
	/** Within-target mean square (one-way), df n(k − 1). */
	wms: number;
	/** Between-judges mean square, df k − 1. */
	jms: number;
	/** Residual (error) mean square of the two-way model, df (n − 1)(k − 1). */
	ems: number;
}

export interface IccResult {
	/** Number of targets (rows). */
	n: number;
	/** Number of raters (columns). */
	k: number;
	meanSquares: IccMeanSquares;
	/** The six coefficients; a value is null when its denominator is 0 (see `undefinedReason`). */
	icc: Record<IccForm, number | null>;
	undefinedReason: string | null;
}

/** Validate an n × k ratings matrix: n ≥ 2 rows, every row the same length k ≥ 2, finite numbers. */
export function validateRatings(ratings: ReadonlyArray<ReadonlyArray<number>>, path = 'ratings'): void {
	if (!Array.isArray(ratings)) throw new AgreementInputError(path, 'expected an array of rows');
	if (ratings.length < 2) {
		throw new AgreementInputError(path, `expected at least 2 rows (targets), got ${ratings.length}`);
	}
	let k = -1;
	ratings.forEach((row, i) => {
		if (!Array.isArray(row)) throw new AgreementInputError(`${path}[${i}]`, 'expected an array of numbers');
		if (i === 0) {
			k = row.length;
			if (k < 2) {
				throw new AgreementInputError(`${path}[0]`, `expected at least 2 ratings (raters), got ${k}`);
			}
		} else if (row.length !== k) {
			throw new AgreementInputError(`${path}[${i}]`, `expected ${k} ratings like row 0, got ${row.length} (missing values are not allowed)`);
		}
		row.forEach((v, j) => {
			if (typeof v !== 'number' || !Number.isFinite(v)) {
				throw new AgreementInputError(`${path}[${i}][${j}]`, 'expected a finite number');
			}
		});
	});
}

/**
 * The two-way ANOVA mean squares of an n × k matrix (rows = targets, columns = judges), as in
 * Shrout & Fleiss (1979), Table 2. Sums of squares are computed from centred deviations
 * (not from raw sums of squares) for accuracy:
 *   SST = Σ (xᵢⱼ − x̄)²,  SSB = k Σ (x̄ᵢ. − x̄)²,  SSJ = n Σ (x̄.ⱼ − x̄)²,
 *   SSW = Σ (xᵢⱼ − x̄ᵢ.)²  (= SST − SSB),  SSE = Σ (xᵢⱼ − x̄ᵢ. − x̄.ⱼ + x̄)²  (= SST − SSB − SSJ)
 *   BMS = SSB/(n − 1), WMS = SSW/(n(k − 1)), JMS = SSJ/(k − 1), EMS = SSE/((n − 1)(k − 1))
 */
export function iccMeanSquares(ratings: ReadonlyArray<ReadonlyArray<number>>): IccMeanSquares {
	validateRatings(ratings);
	const n = ratings.length;
	const k = ratings[0].length;
	let total = 0;
	const rowMeans = ratings.map((row) => {
		let s = 0;
		for (const v of row) s += v;
		total += s;
		return s / k;
	});
	const grand = total / (n * k);
	const colMeans = new Array<number>(k).fill(0);
	for (const row of ratings) for (let j = 0; j < k; j++) colMeans[j] += row[j];
	for (let j = 0; j < k; j++) colMeans[j] /= n;

	let ssb = 0;
	for (const m of rowMeans) ssb += (m - grand) ** 2;
	ssb *= k;
	let ssj = 0;
	for (const m of colMeans) ssj += (m - grand) ** 2;
	ssj *= n;
	let ssw = 0;
	let sse = 0;
	for (let i = 0; i < n; i++) {
		for (let j = 0; j < k; j++) {
			const x = ratings[i][j];
			ssw += (x - rowMeans[i]) ** 2;
			sse += (x - rowMeans[i] - colMeans[j] + grand) ** 2;
		}
	}
	return {
		bms: ssb / (n - 1),
		wms: ssw / (n * (k - 1)),
		jms: ssj / (k - 1),
		ems: sse / ((n - 1) * (k - 1))
	};
}

/**
 * The six intraclass correlations of Shrout & Fleiss (1979) from an n × k matrix of ratings
 * (one row per target, one column per rater; no missing values):
 *
 *   ICC(1,1) = (BMS − WMS) / (BMS + (k − 1)·WMS)
 *   ICC(2,1) = (BMS − EMS) / (BMS + (k − 1)·EMS + k·(JMS − EMS)/n)
 *   ICC(3,1) = (BMS − EMS) / (BMS + (k − 1)·EMS)
 *   ICC(1,k) = (BMS − WMS) / BMS
 *   ICC(2,k) = (BMS − EMS) / (BMS + (JMS − EMS)/n)
 *   ICC(3,k) = (BMS − EMS) / BMS
 *
 * Values are not clamped: a negative ICC is reported as computed. A coefficient whose
 * denominator is 0 is null (e.g. every rating equal: no variance to apportion).
 */
/**
 * The six Shrout & Fleiss coefficients from the ANOVA mean squares of n targets × k raters, with
 * the reason when some are undefined. Shared by the matrix form above and by the audit's running
 * sums (src/lib/server/audit-stats/sums.ts), so the formulas exist once.
 */
export function iccFromMeanSquares(
	ms: { bms: number; wms: number; jms: number; ems: number },
	n: number,
	k: number,
	constant: boolean
): { icc: Record<IccForm, number | null>; undefinedReason: string | null } {
	const { bms, wms, jms, ems } = ms;
	const scale = bms + wms + jms + ems;
	const ratio = (num: number, den: number): number | null => (constant || !(Math.abs(den) > 1e-14 * scale) ? null : num / den);
	const icc: Record<IccForm, number | null> = {
		'ICC(1,1)': ratio(bms - wms, bms + (k - 1) * wms),
		'ICC(2,1)': ratio(bms - ems, bms + (k - 1) * ems + (k * (jms - ems)) / n),
		'ICC(3,1)': ratio(bms - ems, bms + (k - 1) * ems),
		'ICC(1,k)': ratio(bms - wms, bms),
		'ICC(2,k)': ratio(bms - ems, bms + (jms - ems) / n),
		'ICC(3,k)': ratio(bms - ems, bms)
	};
	const anyNull = ICC_FORMS.some((f) => icc[f] === null);
	const undefinedReason = constant
		? 'every rating is the same value: there is no variance, so every ICC is 0/0'
		: anyNull
			? 'a denominator is 0 (no variance between targets), so that ICC is undefined'
			: null;
	return { icc, undefinedReason };
}

export function intraclassCorrelation(ratings: ReadonlyArray<ReadonlyArray<number>>): IccResult {
	const ms = iccMeanSquares(ratings); // validates
	const n = ratings.length;
	const k = ratings[0].length;
	const first = ratings[0][0];
	const constant = ratings.every((row) => row.every((v) => v === first));
	const { icc, undefinedReason } = iccFromMeanSquares(ms, n, k, constant);
	return { n, k, meanSquares: ms, icc, undefinedReason };
}

// ---------------------------------------------------------------------------------------------
// Bland–Altman (Bland & Altman 1986)
// ---------------------------------------------------------------------------------------------

/** The multiplier for the 95% limits of agreement, as specified: bias ± 1.96·sd. */
export const LIMITS_Z = 1.96;

export interface BlandAltmanResult {
	/** Mean of the differences x − y. */
	bias: number;
	/** Sample standard deviation of the differences (divisor n − 1). */
	sd: number;
	/** bias − 1.96·sd. */
	lower: number;
	/** bias + 1.96·sd. */
	upper: number;
	n: number;
}

function validateNumberPairs(pairs: ReadonlyArray<readonly [number, number]>, min: number): void {
	if (!Array.isArray(pairs)) throw new AgreementInputError('pairs', 'expected an array');
	if (pairs.length < min) {
		throw new AgreementInputError('pairs', `expected at least ${min} pairs, got ${pairs.length}`);
	}
	pairs.forEach((pair, i) => {
		if (!Array.isArray(pair) || pair.length !== 2) {
			throw new AgreementInputError(`pairs[${i}]`, 'expected a pair of two numbers');
		}
		for (const j of [0, 1] as const) {
			if (typeof pair[j] !== 'number' || !Number.isFinite(pair[j])) {
				throw new AgreementInputError(`pairs[${i}][${j}]`, 'expected a finite number');
			}
		}
	});
}

/**
 * Bland & Altman (1986) agreement of two measurements per subject: the differences
 * dᵢ = xᵢ − yᵢ, bias = mean d, sd = √(Σ (dᵢ − bias)² / (n − 1)), 95% limits of agreement
 * bias ± 1.96·sd. Needs at least 2 pairs.
 */
export function blandAltman(pairs: ReadonlyArray<readonly [number, number]>): BlandAltmanResult {
	validateNumberPairs(pairs, 2);
	const n = pairs.length;
	let sum = 0;
	for (const [x, y] of pairs) sum += x - y;
	const bias = sum / n;
	let ss = 0;
	for (const [x, y] of pairs) ss += (x - y - bias) ** 2;
	const sd = Math.sqrt(ss / (n - 1));
	return { bias, sd, lower: bias - LIMITS_Z * sd, upper: bias + LIMITS_Z * sd, n };
}

/**
 * {@link blandAltman} from grouped pairs: each cell is [x, y, number of pairs with those two
 * values]. Each pair is still added one at a time, in cell order, so the result is the same to the
 * last bit as `blandAltman` on the list that repeats each cell's pair `count` times — without
 * building that list (the Audit's plot groups identical pairs in SQL: a few thousand cells for
 * hundreds of thousands of pairs).
 */
export function blandAltmanFromCounts(cells: ReadonlyArray<readonly [number, number, number]>): BlandAltmanResult {
	if (!Array.isArray(cells)) throw new AgreementInputError('cells', 'expected an array');
	let n = 0;
	cells.forEach((cell, i) => {
		if (!Array.isArray(cell) || cell.length !== 3) throw new AgreementInputError(`cells[${i}]`, 'expected [x, y, count]');
		for (const j of [0, 1] as const) {
			if (typeof cell[j] !== 'number' || !Number.isFinite(cell[j])) throw new AgreementInputError(`cells[${i}][${j}]`, 'expected a finite number');
		}
		if (!Number.isSafeInteger(cell[2]) || cell[2] < 0) throw new AgreementInputError(`cells[${i}][2]`, 'expected a whole number of pairs, 0 or more');
		n += cell[2];
	});
	if (n < 2) throw new AgreementInputError('cells', `expected at least 2 pairs, got ${n}`);
	let sum = 0;
	for (const [x, y, c] of cells) for (let i = 0; i < c; i++) sum += x - y;
	const bias = sum / n;
	let ss = 0;
	for (const [x, y, c] of cells) for (let i = 0; i < c; i++) ss += (x - y - bias) ** 2;
	const sd = Math.sqrt(ss / (n - 1));
	return { bias, sd, lower: bias - LIMITS_Z * sd, upper: bias + LIMITS_Z * sd, n };
}

/** The points of a Bland–Altman plot: the mean of each pair against its difference x − y. */
export function blandAltmanPoints(pairs: ReadonlyArray<readonly [number, number]>): Array<{ mean: number; difference: number }> {
	validateNumberPairs(pairs, 0);
	return pairs.map(([x, y]) => ({ mean: (x + y) / 2, difference: x - y }));
}

// ---------------------------------------------------------------------------------------------
// Interpretation bands
// ---------------------------------------------------------------------------------------------

export interface Band {
	label: string;
	/** The range as the source prints it. */
	published: string;
	/** Lower bound (null: unbounded) and whether a value equal to it belongs to this band. */
	min: number | null;
	minInclusive: boolean;
	/** Upper bound (null: unbounded) and whether a value equal to it belongs to this band. */
	max: number | null;
	maxInclusive: boolean;
}

export interface BandScheme {
	/** Short attribution to show beside the label. */
	source: string;
	/** Full reference. */
	citation: string;
	bands: readonly Band[];
}

export interface Interpretation {
	label: string;
	published: string;
	source: string;
	citation: string;
}

const band = (label: string, published: string, min: number | null, minInclusive: boolean, max: number | null, maxInclusive: boolean): Band => ({
	label,
	published,
	min,
	minInclusive,
	max,
	maxInclusive
});

/**
 * Landis & Koch (1977) benchmarks for kappa. The paper prints two-decimal ranges
 * (0.21–0.40 …); for continuous values each band runs from just above the previous upper
 * bound up to and including its own: (0.20, 0.40] is "fair".
 */
export const LANDIS_KOCH_1977: BandScheme = {
	source: 'Landis & Koch (1977)',
	citation: 'Landis JR, Koch GG. The measurement of observer agreement for categorical data. ' + 'Biometrics. 1977;33(1):159–174.',
	bands: [
		band('poor', '< 0.00', null, false, 0, false),
		band('slight', '0.00–0.20', 0, true, 0.2, true),
		band('fair', '0.21–0.40', 0.2, false, 0.4, true),
		band('moderate', '0.41–0.60', 0.4, false, 0.6, true),
		band('substantial', '0.61–0.80', 0.6, false, 0.8, true),
		band('almost perfect', '0.81–1.00', 0.8, false, null, false)
	]
};

/**
 * Koo & Li (2016) guideline for ICC: below 0.50 poor, 0.50–0.75 moderate, 0.75–0.90 good,
 * above 0.90 excellent. Boundaries: 0.50 and 0.75 open the band above them; 0.90 is "good"
 * ("greater than 0.90" is excellent).
 */
export const KOO_LI_2016: BandScheme = {
	source: 'Koo & Li (2016)',
	citation:
		'Koo TK, Li MY. A guideline of selecting and reporting intraclass correlation ' +
		'coefficients for reliability research. J Chiropr Med. 2016;15(2):155–163.',
	bands: [
		band('poor', '< 0.50', null, false, 0.5, false),
		band('moderate', '0.50–0.75', 0.5, true, 0.75, false),
		band('good', '0.75–0.90', 0.75, true, 0.9, true),
		band('excellent', '> 0.90', 0.9, false, null, false)
	]
};

function inBand(value: number, b: Band): boolean {
	const aboveMin = b.min === null || (b.minInclusive ? value >= b.min : value > b.min);
	const belowMax = b.max === null || (b.maxInclusive ? value <= b.max : value < b.max);
	return aboveMin && belowMax;
}

/** The band of `value` in `scheme`; null for null or non-finite values. */
export function interpret(value: number | null | undefined, scheme: BandScheme): Interpretation | null {
	if (value === null || value === undefined || !Number.isFinite(value)) return null;
	const b = scheme.bands.find((candidate) => inBand(value, candidate));
	if (!b) return null; // unreachable: the bands cover the real line
	return { label: b.label, published: b.published, source: scheme.source, citation: scheme.citation };
}

/** Landis & Koch (1977) label for a kappa. */
export function interpretKappa(kappa: number | null | undefined): Interpretation | null {
	return interpret(kappa, LANDIS_KOCH_1977);
}

/** Koo & Li (2016) label for an ICC. */
export function interpretIcc(icc: number | null | undefined): Interpretation | null {
	return interpret(icc, KOO_LI_2016);
}
