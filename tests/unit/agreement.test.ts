/**
 * The agreement statistics against published worked examples (source named beside each
 * check; "from memory" where the figure could not be confirmed against a public copy), plus
 * fast-check properties.
 */
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
	ICC_FORMS,
	KOO_LI_2016,
	LANDIS_KOCH_1977,
	blandAltman,
	blandAltmanPoints,
	cohenKappa,
	iccMeanSquares,
	interpretIcc,
	interpretKappa,
	intraclassCorrelation,
	kappaWeight,
	percentAgreement,
	type KappaWeights
} from '../../src/lib/scoring/agreement';
import { errorRatePer100, wilsonInterval, Z_95 } from '../../src/lib/scoring/rates';
import { GWET_ABSTRACTORS, PEFR_MINI, PEFR_WRIGHT, SHROUT_FLEISS, pairsFromTable, thrown } from './agreement-fixtures';

const ALL_WEIGHTS: KappaWeights[] = ['none', 'linear', 'quadratic'];

// -------------------------------------------------------------------------------------------
describe("Cohen's kappa: published examples", () => {
	it('Artstein & Poesio (2008), Table 1: 2×2 table [[20,20],[10,50]] gives κ = .348', () => {
		// Source: Artstein R, Poesio M. Inter-coder agreement for computational linguistics.
		// Computational Linguistics 2008;34(4):555–596, Table 1; the value .348 is the one the
		// scikit-learn test suite asserts for this table (sklearn/metrics/tests/
		// test_classification.py, test_cohen_kappa), which is where we confirmed it.
		// By hand: n = 100, pₒ = (20 + 50)/100 = .70; marginals rater 1 (40, 60), rater 2
		// (30, 70); pₑ = .4·.3 + .6·.7 = .54; κ = (.70 − .54)/(1 − .54) = .16/.46 = .347826…
		const r = cohenKappa(
			pairsFromTable(
				[
					[20, 20],
					[10, 50]
				],
				['a', 'b']
			)
		);
		expect(r.n).toBe(100);
		expect(r.observed).toBeCloseTo(0.7, 12);
		expect(r.expected).toBeCloseTo(0.54, 12);
		expect(r.kappa).toBeCloseTo(0.16 / 0.46, 12);
		expect(r.kappa!.toFixed(3)).toBe('0.348');
	});

	it('Artstein & Poesio (2008), Table 4: 3-category example gives κ = .8013', () => {
		// Same sources as above (scikit-learn asserts .8013 to 4 decimals). The table is
		// rater 1 (46, 44, 10) vs rater 2 (52, 32, 16) with 46 + 32 + 10 = 88 agreements:
		// pₒ = .88, pₑ = .46·.52 + .44·.32 + .10·.16 = .396, κ = .484/.604 = .801325…
		const table = [
			[46, 0, 0],
			[6, 32, 6],
			[0, 0, 10]
		];
		const r = cohenKappa(pairsFromTable(table, ['x', 'y', 'z']));
		expect(r.observed).toBeCloseTo(0.88, 12);
		expect(r.expected).toBeCloseTo(0.396, 12);
		expect(r.kappa).toBeCloseTo(0.484 / 0.604, 12);
		expect(r.kappa!.toFixed(4)).toBe('0.8013');
	});

	it('Gwet (2014) cont3x3abstractors: κ = .7964094, linear .843, quadratic .8921569', () => {
		// Source: Gwet KL. Handbook of Inter-Rater Reliability, 4th ed. (2014), distribution of
		// 100 pregnant women by type (Ectopic, AIU, NIU) and abstractor, as shipped in the R
		// package irrCAC (dataset cont3x3abstractors). The unweighted 0.7964094 and quadratic
		// 0.8921569 are the printed example output of irrCAC::kappa2.table on rdrr.io; the
		// linear 0.843 is asserted by the Python port's tests (afergadis/irrCAC,
		// test/unit/irrCAC/table/test_cohen.py). Confirmed via search, not against the book.
		const { table, categories } = GWET_ABSTRACTORS;
		const pairs = pairsFromTable(table, categories);
		const none = cohenKappa(pairs, { categories });
		expect(none.kappa).toBeCloseTo(0.7964094, 7);
		// pₒ = (13 + 20 + 56)/100 = .89 exactly.
		expect(none.observed).toBeCloseTo(0.89, 12);
		expect(cohenKappa(pairs, { weights: 'linear', categories }).kappa!.toFixed(3)).toBe('0.843');
		expect(cohenKappa(pairs, { weights: 'quadratic', categories }).kappa).toBeCloseTo(0.8921569, 7);
	});

	it('Gwet cont4x4diagnosis (223 patients): κ = .432, linear .407, quadratic .383', () => {
		// Source: the irrCAC dataset cont4x4diagnosis (clinical vs research diagnosis, 223
		// psychiatric patients; Gwet's handbook) and the values asserted, to 3 decimals, in
		// afergadis/irrCAC test/unit/irrCAC/table/test_cohen.py.
		const table = [
			[40, 4, 4, 17],
			[6, 25, 2, 13],
			[4, 1, 21, 12],
			[15, 5, 9, 45]
		];
		const categories = ['Schizophrenia', 'Bipolar', 'Depression', 'Other'];
		const pairs = pairsFromTable(table, categories);
		expect(pairs).toHaveLength(223);
		expect(cohenKappa(pairs, { categories }).kappa!.toFixed(3)).toBe('0.432');
		expect(cohenKappa(pairs, { weights: 'linear', categories }).kappa!.toFixed(3)).toBe('0.407');
		expect(cohenKappa(pairs, { weights: 'quadratic', categories }).kappa!.toFixed(3)).toBe('0.383');
	});

	it('scikit-learn weighting example: none .9315, linear .9412, quadratic .9541', () => {
		// Source: scikit-learn's own test (test_cohen_kappa, "Weighting example"): rater 1
		// (46, 44, 10), rater 2 (50, 40, 10) paired in order, i.e. 46 (0,0), 4 (1,0),
		// 40 (1,1), 10 (2,2). A documented test value, not a published paper.
		const categories = ['0', '1', '2'];
		const pairs = pairsFromTable(
			[
				[46, 0, 0],
				[4, 40, 0],
				[0, 0, 10]
			],
			categories
		);
		expect(cohenKappa(pairs, { categories }).kappa!.toFixed(4)).toBe('0.9315');
		expect(cohenKappa(pairs, { weights: 'linear', categories }).kappa!.toFixed(4)).toBe('0.9412');
		expect(cohenKappa(pairs, { weights: 'quadratic', categories }).kappa!.toFixed(4)).toBe('0.9541');
	});
});

describe("Cohen's kappa: formulas and choices", () => {
	it('weighted observed/expected are weighted agreements (hand-computed, quadratic, q = 3)', () => {
		// Hand example (ours): pairs (a,a) (a,b) (b,c) (c,c), categories a < b < c.
		// Quadratic agreement weights: w = 1 on the diagonal, 1 − 1/4 = .75 one step apart,
		// 0 two steps apart. observed = (1 + .75 + .75 + 1)/4 = .875.
		// Marginals: rater 1 (2, 1, 1), rater 2 (1, 1, 2); expected = Σ wᵢⱼ rᵢ cⱼ / 16
		// = (2·1 + .75·2·1 + .75·1·1 + 1·1·1 + .75·1·2 + .75·1·1 + 1·1·2)/16 = 9.5/16 = .59375.
		// κ = (.875 − .59375)/(1 − .59375) = .28125/.40625 = 9/13.
		const r = cohenKappa(
			[
				['a', 'a'],
				['a', 'b'],
				['b', 'c'],
				['c', 'c']
			],
			{ weights: 'quadratic', categories: ['a', 'b', 'c'] }
		);
		expect(r.observed).toBeCloseTo(0.875, 12);
		expect(r.expected).toBeCloseTo(0.59375, 12);
		expect(r.kappa).toBeCloseTo(9 / 13, 12);
		// Disagreement form: 1 − Σ v p / Σ v pₑ with v = 1 − w gives the same κ.
		expect(1 - (1 - r.observed) / (1 - r.expected)).toBeCloseTo(r.kappa!, 12);
	});

	it('agreement weights: linear 1 − |i−j|/(q−1), quadratic 1 − (i−j)²/(q−1)²', () => {
		expect(kappaWeight('none', 1, 1, 5)).toBe(1);
		expect(kappaWeight('none', 1, 2, 5)).toBe(0);
		expect(kappaWeight('linear', 0, 1, 5)).toBeCloseTo(0.75, 12);
		expect(kappaWeight('linear', 0, 4, 5)).toBe(0);
		expect(kappaWeight('quadratic', 0, 2, 5)).toBeCloseTo(0.75, 12);
		expect(kappaWeight('quadratic', 4, 0, 5)).toBe(0);
	});

	it('derives categories in first-appearance order when none are given (unweighted)', () => {
		const r = cohenKappa([
			['low', 'high'],
			['avg', 'low'],
			['high', 'high']
		]);
		expect(r.categories).toEqual(['low', 'high', 'avg']);
		expect(r.weights).toBe('none');
	});

	it('given categories for unweighted kappa do not change it', () => {
		const pairs: [string, string][] = [
			['a', 'b'],
			['b', 'b'],
			['a', 'a'],
			['c', 'a']
		];
		const derived = cohenKappa(pairs);
		const given = cohenKappa(pairs, { categories: ['c', 'b', 'a', 'unused'] });
		expect(given.kappa).toBeCloseTo(derived.kappa!, 12);
		expect(given.categories).toEqual(['c', 'b', 'a', 'unused']);
	});

	it('unused categories at the ends of the scale leave weighted kappa unchanged', () => {
		const pairs: [string, string][] = [
			['b', 'b'],
			['b', 'c'],
			['b', 'd'],
			['d', 'd'],
			['c', 'c'],
			['d', 'c'],
			['c', 'c']
		];
		for (const weights of ['linear', 'quadratic'] as const) {
			const tight = cohenKappa(pairs, { weights, categories: ['b', 'c', 'd'] });
			const wide = cohenKappa(pairs, { weights, categories: ['a', 'b', 'c', 'd', 'e'] });
			expect(wide.kappa!).toBeCloseTo(tight.kappa!, 12);
			expect(wide.observed).not.toBeCloseTo(tight.observed, 6);
			const gap = cohenKappa(pairs, { weights, categories: ['b', 'x', 'c', 'd'] });
			expect(gap.kappa!).not.toBeCloseTo(tight.kappa!, 6);
		}
	});

	it('pe = 1 (one and the same category throughout) gives kappa null with a reason', () => {
		const unweighted = cohenKappa([
			['a', 'a'],
			['a', 'a']
		]);
		expect(unweighted.kappa).toBeNull();
		expect(unweighted.observed).toBe(1);
		expect(unweighted.expected).toBe(1);
		expect(unweighted.undefinedReason).toMatch(/chance agreement is 1/);
		const weighted = cohenKappa([['b', 'b']], { weights: 'quadratic', categories: ['a', 'b', 'c'] });
		expect(weighted.kappa).toBeNull();
		expect(weighted.undefinedReason).not.toBeNull();
	});

	it('complete disagreement with swapped labels gives κ = −1', () => {
		const r = cohenKappa([
			['a', 'b'],
			['b', 'a']
		]);
		expect(r.kappa).toBeCloseTo(-1, 12);
		expect(r.undefinedReason).toBeNull();
	});

	it('rejects weights without categories, unknown labels, duplicates and empty input', () => {
		expect(thrown(() => cohenKappa([['a', 'b']], { weights: 'linear' })).path).toBe('categories');
		const unknown = thrown(() =>
			cohenKappa(
				[
					['a', 'b'],
					['z', 'a']
				],
				{ categories: ['a', 'b'] }
			)
		);
		expect(unknown.path).toBe('pairs[1][0]');
		expect(unknown.message).toMatch(/"z" is not in categories/);
		expect(thrown(() => cohenKappa([['a', 'a']], { categories: ['a', 'a'] })).path).toBe('categories[1]');
		expect(thrown(() => cohenKappa([['a', 'a']], { weights: 'quadratic', categories: ['a'] })).path).toBe('categories');
		expect(thrown(() => cohenKappa([])).path).toBe('pairs');
		expect(thrown(() => cohenKappa([['a', 1 as unknown as string]])).path).toBe('pairs[0][1]');
	});
});

// -------------------------------------------------------------------------------------------
describe('Intraclass correlation: Shrout & Fleiss (1979)', () => {
	// Shrout PE, Fleiss JL. Intraclass correlations: uses in assessing rater reliability.
	// Psychological Bulletin 1979;86(2):420–428, Table 2: 6 targets rated by 4 judges.
	const SF = SHROUT_FLEISS;

	it('reproduces the mean squares of the 6 × 4 table (computed by hand)', () => {
		// Grand mean 127/24 = 5.2917. Target means 6, 3, 6.5, 4, 7.5, 4.75; judge means
		// 46/6, 15/6, 26/6, 40/6.
		// SST = Σ(x − x̄)² = 4055/24 = 168.958;  SSB = 4·Σ(target mean − x̄)² = 1349/24 = 56.208;
		// SSJ = 6·Σ(judge mean − x̄)² = 2339/24 = 97.458;  SSW = SST − SSB = 112.75;
		// SSE = SST − SSB − SSJ = 367/24 = 15.292.
		// BMS = SSB/5 = 11.242, WMS = SSW/18 = 6.264, JMS = SSJ/3 = 32.486, EMS = SSE/15 = 1.019
		// (the paper's ANOVA table prints 11.24, 6.26, 32.49, 1.02 — from memory).
		const ms = iccMeanSquares(SF);
		expect(ms.bms).toBeCloseTo(1349 / 24 / 5, 12);
		expect(ms.wms).toBeCloseTo(112.75 / 18, 12);
		expect(ms.jms).toBeCloseTo(2339 / 24 / 3, 12);
		expect(ms.ems).toBeCloseTo(367 / 24 / 15, 12);
		expect(ms.bms.toFixed(2)).toBe('11.24');
		expect(ms.wms.toFixed(2)).toBe('6.26');
		expect(ms.jms.toFixed(2)).toBe('32.49');
		expect(ms.ems.toFixed(2)).toBe('1.02');
	});

	it('reproduces the published ICCs .17 .29 .71 .44 .62 .91', () => {
		// Published values (Shrout & Fleiss 1979, Table 4): ICC(1,1) .17, ICC(2,1) .29,
		// ICC(3,1) .71, ICC(1,4) .44, ICC(2,4) .62, ICC(3,4) .91. Not read from the paper
		// itself here: confirmed against tjmahr/iccbot tests/testthat/test-icc.R ("Output
		// matches Shrout and Fleiss (1979)", the same six values to 2 decimals) and the psych
		// package's ICC() example on this table (ICC1 .17, ICC1k .44 quoted by
		// mheerdink/bayesian_ICC). Exact values from the mean squares above:
		//   ICC(1,1) = (BMS − WMS)/(BMS + 3·WMS)                  = .165742
		//   ICC(2,1) = (BMS − EMS)/(BMS + 3·EMS + 4(JMS − EMS)/6) = .289764
		//   ICC(3,1) = (BMS − EMS)/(BMS + 3·EMS)                  = .714841
		//   ICC(1,k) = (BMS − WMS)/BMS                            = .442797
		//   ICC(2,k) = (BMS − EMS)/(BMS + (JMS − EMS)/6)          = .620051
		//   ICC(3,k) = (BMS − EMS)/BMS                            = .909316
		const r = intraclassCorrelation(SF);
		expect(r.n).toBe(6);
		expect(r.k).toBe(4);
		expect(r.undefinedReason).toBeNull();
		const published: Record<string, string> = {
			'ICC(1,1)': '0.17',
			'ICC(2,1)': '0.29',
			'ICC(3,1)': '0.71',
			'ICC(1,k)': '0.44',
			'ICC(2,k)': '0.62',
			'ICC(3,k)': '0.91'
		};
		for (const form of ICC_FORMS) expect(r.icc[form]!.toFixed(2), form).toBe(published[form]);
		const { bms, wms, jms, ems } = r.meanSquares;
		expect(r.icc['ICC(1,1)']).toBeCloseTo((bms - wms) / (bms + 3 * wms), 12);
		expect(r.icc['ICC(2,1)']).toBeCloseTo((bms - ems) / (bms + 3 * ems + (4 * (jms - ems)) / 6), 12);
		expect(r.icc['ICC(3,1)']).toBeCloseTo(0.714841, 6);
		expect(r.icc['ICC(1,k)']).toBeCloseTo(0.442797, 6);
		expect(r.icc['ICC(2,k)']).toBeCloseTo(0.620051, 6);
		expect(r.icc['ICC(3,k)']).toBeCloseTo(0.909316, 6);
	});

	it('perfect agreement on distinct targets gives every ICC = 1', () => {
		const r = intraclassCorrelation([
			[1, 1, 1],
			[2, 2, 2],
			[5, 5, 5]
		]);
		for (const form of ICC_FORMS) expect(r.icc[form]).toBeCloseTo(1, 12);
	});

	it('a constant additive rater bias lowers ICC(1,·) and ICC(2,·) but leaves ICC(3,·) at 1', () => {
		const r = intraclassCorrelation([
			[1, 3],
			[2, 4],
			[5, 7],
			[9, 11]
		]);
		expect(r.icc['ICC(3,1)']).toBeCloseTo(1, 12);
		expect(r.icc['ICC(3,k)']).toBeCloseTo(1, 12);
		expect(r.icc['ICC(2,1)']!).toBeLessThan(1);
		expect(r.icc['ICC(1,1)']!).toBeLessThan(r.icc['ICC(2,1)']!);
	});

	it('no variance at all gives null ICCs with a reason', () => {
		const r = intraclassCorrelation([
			[0.1, 0.1],
			[0.1, 0.1],
			[0.1, 0.1]
		]);
		for (const form of ICC_FORMS) expect(r.icc[form]).toBeNull();
		expect(r.undefinedReason).toMatch(/no variance/);
	});

	it('rejects ragged rows, missing values, fewer than 2 rows or 2 raters', () => {
		expect(thrown(() => intraclassCorrelation([[1, 2], [3, 4], [5]])).path).toBe('ratings[2]');
		expect(
			thrown(() =>
				intraclassCorrelation([
					[1, 2],
					[3, NaN]
				])
			).path
		).toBe('ratings[1][1]');
		expect(
			thrown(() =>
				intraclassCorrelation([
					[1, 2],
					[3, null as unknown as number]
				])
			).path
		).toBe('ratings[1][1]');
		expect(thrown(() => intraclassCorrelation([[1, 2]])).path).toBe('ratings');
		expect(thrown(() => intraclassCorrelation([[1], [2]])).path).toBe('ratings[0]');
	});
});

// -------------------------------------------------------------------------------------------
describe('Bland–Altman (1986)', () => {
	// Bland JM, Altman DG. Statistical methods for assessing agreement between two methods of
	// clinical measurement. Lancet 1986;i(8476):307–310. PEFR (l/min) of 17 subjects, first
	// reading with the large Wright meter and with the mini Wright meter. The data as shipped
	// in the R package BlandAltmanLeh (bland.altman.PEFR, columns bigger.first and
	// smaller.first), confirmed via search.
	const wright = PEFR_WRIGHT;
	const mini = PEFR_MINI;
	const pairs = wright.map((w, i) => [w, mini[i]] as [number, number]);

	it('PEFR data: bias −2.1 l/min, SD 38.8, limits bias ± 1.96·SD', () => {
		// Σ(Wright − mini) = −36, so bias = −36/17 = −2.1176. Paper: mean difference −2.1,
		// SD 38.8 (from memory); its limits, −79.7 to 75.5, use ±2 SD (from memory). With the
		// 1.96 of our specification the limits are −78.1 to 73.9, which matches the
		// Analyse-it Bland–Altman tutorial on the same data (mini − Wright: 2.1, −73.9 to
		// 78.1; analyse-it.com/docs/tutorials/blandaltman/estimatingloa, confirmed via search).
		const r = blandAltman(pairs);
		expect(r.n).toBe(17);
		expect(r.bias).toBeCloseTo(-36 / 17, 12);
		expect(r.bias.toFixed(1)).toBe('-2.1');
		expect(r.sd.toFixed(1)).toBe('38.8');
		expect(r.lower).toBeCloseTo(r.bias - 1.96 * r.sd, 12);
		expect(r.upper).toBeCloseTo(r.bias + 1.96 * r.sd, 12);
		expect(r.lower.toFixed(1)).toBe('-78.1');
		expect(r.upper.toFixed(1)).toBe('73.9');
		// The paper's own limits use ±2 SD on rounded figures: −2.1 ± 2·38.8 = −79.7, 75.5
		// (from memory); unrounded, bias ± 2·sd gives −79.6 and 75.4.
		expect((r.bias - 2 * r.sd).toFixed(1)).toBe('-79.6');
		expect((r.bias + 2 * r.sd).toFixed(1)).toBe('75.4');
	});

	it('small hand-computed example: differences −1, 0, 1 give bias 0, sd 1, limits ±1.96', () => {
		const r = blandAltman([
			[1, 2],
			[3, 3],
			[5, 4]
		]);
		expect(r).toEqual({ bias: 0, sd: 1, lower: -1.96, upper: 1.96, n: 3 });
	});

	it('sample SD uses n − 1: differences 2 and 4 give sd √2', () => {
		const r = blandAltman([
			[2, 0],
			[4, 0]
		]);
		expect(r.bias).toBe(3);
		expect(r.sd).toBeCloseTo(Math.SQRT2, 12);
	});

	it('plot points are (mean, x − y)', () => {
		expect(blandAltmanPoints([[10, 6]])).toEqual([{ mean: 8, difference: 4 }]);
	});

	it('rejects fewer than 2 pairs and non-numbers', () => {
		expect(thrown(() => blandAltman([[1, 2]])).path).toBe('pairs');
		expect(
			thrown(() =>
				blandAltman([
					[1, 2],
					[3, Infinity]
				])
			).path
		).toBe('pairs[1][1]');
		expect(thrown(() => blandAltman([[1, 2], [3] as unknown as [number, number]])).path).toBe('pairs[1]');
	});
});

// -------------------------------------------------------------------------------------------
describe('percent agreement', () => {
	it('counts identical pairs', () => {
		expect(
			percentAgreement([
				['a', 'a'],
				['a', 'b'],
				[3, 3],
				[3, 4]
			])
		).toEqual({ agreements: 2, n: 4, proportion: 0.5, percent: 50 });
		expect(thrown(() => percentAgreement([])).path).toBe('pairs');
	});
});

// -------------------------------------------------------------------------------------------
describe('Wilson score interval', () => {
	it('matches Newcombe (1998) Table II, method 3 (from memory)', () => {
		// Newcombe RG. Two-sided confidence intervals for the single proportion: comparison of
		// seven methods. Stat Med 1998;17:857–872, examples 81/263, 15/148, 0/20, 1/29 (the
		// four-decimal limits below are from memory, not re-read from the paper).
		const cases: [number, number, number, number][] = [
			[81, 263, 0.2553, 0.3662],
			[15, 148, 0.0624, 0.1605],
			[0, 20, 0, 0.1611],
			[1, 29, 0.0061, 0.1718]
		];
		for (const [x, n, lo, hi] of cases) {
			const w = wilsonInterval(x, n)!;
			expect(w.lower, `${x}/${n} lower`).toBeCloseTo(lo, 4);
			expect(w.upper, `${x}/${n} upper`).toBeCloseTo(hi, 4);
		}
	});

	it('2/10 by hand: centre (0.2 + z²/20)/(1 + z²/10), limits .0567 and .5098', () => {
		const z = Z_95;
		const centre = (0.2 + (z * z) / 20) / (1 + (z * z) / 10);
		const half = (z * Math.sqrt(0.016 + (z * z) / 400)) / (1 + (z * z) / 10);
		const w = wilsonInterval(2, 10)!;
		expect(w.lower).toBeCloseTo(centre - half, 12);
		expect(w.upper).toBeCloseTo(centre + half, 12);
		expect(w.lower).toBeCloseTo(0.056682, 6);
		expect(w.upper).toBeCloseTo(0.509838, 6);
		expect(w.per100.rate).toBeCloseTo(20, 12);
		expect(w.per100.lower).toBeCloseTo(5.6682, 4);
		expect(w.per100.upper).toBeCloseTo(50.9838, 4);
	});

	it('scales per 100 fields, is null without trials and rejects impossible counts', () => {
		const r = errorRatePer100(3, 1200)!;
		expect(r.per100.rate).toBeCloseTo(0.25, 12);
		expect(r.per100.lower).toBeLessThan(0.25);
		expect(r.per100.upper).toBeGreaterThan(0.25);
		expect(wilsonInterval(0, 0)).toBeNull();
		expect(wilsonInterval(5, 5)!.upper).toBe(1);
		expect(() => wilsonInterval(6, 5)).toThrow(RangeError);
		expect(() => wilsonInterval(1.5, 5)).toThrow(RangeError);
		expect(() => wilsonInterval(-1, 5)).toThrow(RangeError);
	});

	it('property: 0 ≤ lower ≤ p ≤ upper ≤ 1, and the interval narrows with more trials', () => {
		fc.assert(
			fc.property(fc.integer({ min: 1, max: 100_000 }), fc.double({ min: 0, max: 1, noNaN: true }), (n, f) => {
				const x = Math.round(f * n);
				const w = wilsonInterval(x, n)!;
				expect(w.lower).toBeGreaterThanOrEqual(0);
				expect(w.lower).toBeLessThanOrEqual(w.proportion + 1e-15);
				expect(w.upper).toBeGreaterThanOrEqual(w.proportion - 1e-15);
				expect(w.upper).toBeLessThanOrEqual(1);
				const bigger = wilsonInterval(10 * x, 10 * n)!;
				expect(bigger.upper - bigger.lower).toBeLessThan(w.upper - w.lower);
			})
		);
	});
});

// -------------------------------------------------------------------------------------------
describe('interpretation bands', () => {
	it('Landis & Koch (1977) for kappa, with source', () => {
		const label = (k: number) => interpretKappa(k)!.label;
		expect(label(-0.01)).toBe('poor');
		expect(label(0)).toBe('slight');
		expect(label(0.2)).toBe('slight');
		expect(label(0.205)).toBe('fair');
		expect(label(0.4)).toBe('fair');
		expect(label(0.41)).toBe('moderate');
		expect(label(0.6)).toBe('moderate');
		expect(label(0.61)).toBe('substantial');
		expect(label(0.8)).toBe('substantial');
		expect(label(0.81)).toBe('almost perfect');
		expect(label(1)).toBe('almost perfect');
		expect(interpretKappa(0.5)!.source).toBe('Landis & Koch (1977)');
		expect(interpretKappa(0.5)!.citation).toMatch(/Biometrics/);
		expect(interpretKappa(null)).toBeNull();
		expect(interpretKappa(NaN)).toBeNull();
	});

	it('Koo & Li (2016) for ICC, with source', () => {
		const label = (v: number) => interpretIcc(v)!.label;
		expect(label(0.49)).toBe('poor');
		expect(label(-0.3)).toBe('poor');
		expect(label(0.5)).toBe('moderate');
		expect(label(0.7499)).toBe('moderate');
		expect(label(0.75)).toBe('good');
		expect(label(0.9)).toBe('good');
		expect(label(0.9001)).toBe('excellent');
		expect(interpretIcc(0.8)!.source).toBe('Koo & Li (2016)');
		expect(interpretIcc(0.8)!.citation).toMatch(/J Chiropr Med/);
	});

	it('property: every finite value falls in exactly one band of each scheme', () => {
		fc.assert(
			fc.property(fc.double({ min: -2, max: 2, noNaN: true }), (v) => {
				for (const scheme of [LANDIS_KOCH_1977, KOO_LI_2016]) {
					const hits = scheme.bands.filter(
						(b) => (b.min === null || (b.minInclusive ? v >= b.min : v > b.min)) && (b.max === null || (b.maxInclusive ? v <= b.max : v < b.max))
					);
					expect(hits).toHaveLength(1);
				}
			})
		);
	});
});

// -------------------------------------------------------------------------------------------
describe('properties', () => {
	const labels = fc.constantFrom('a', 'b', 'c', 'd', 'e');
	const CATS = ['a', 'b', 'c', 'd', 'e'];
	const labelPairs = fc.array(fc.tuple(labels, labels), { minLength: 1, maxLength: 60 });
	const weightsArb = fc.constantFrom<KappaWeights>(...ALL_WEIGHTS);

	it('kappa of identical ratings is 1 whenever more than one category is used', () => {
		fc.assert(
			fc.property(fc.array(labels, { minLength: 2, maxLength: 60 }), weightsArb, (ratings, weights) => {
				fc.pre(new Set(ratings).size > 1);
				const r = cohenKappa(
					ratings.map((l) => [l, l] as [string, string]),
					{ weights, categories: CATS }
				);
				expect(r.kappa).toBe(1);
				expect(r.observed).toBe(1);
			})
		);
	});

	it('swapping the two raters leaves kappa unchanged (every weighting)', () => {
		fc.assert(
			fc.property(labelPairs, weightsArb, (pairs, weights) => {
				const a = cohenKappa(pairs, { weights, categories: CATS });
				const b = cohenKappa(
					pairs.map(([x, y]) => [y, x] as [string, string]),
					{ weights, categories: CATS }
				);
				if (a.kappa === null) expect(b.kappa).toBeNull();
				else expect(b.kappa!).toBeCloseTo(a.kappa, 12);
				expect(b.observed).toBeCloseTo(a.observed, 12);
				expect(b.expected).toBeCloseTo(a.expected, 12);
			})
		);
	});

	it('kappa never exceeds 1 and unweighted kappa is at least −1', () => {
		fc.assert(
			fc.property(labelPairs, weightsArb, (pairs, weights) => {
				const r = cohenKappa(pairs, { weights, categories: CATS });
				if (r.kappa === null) return;
				expect(r.kappa).toBeLessThanOrEqual(1 + 1e-12);
				if (weights === 'none') expect(r.kappa).toBeGreaterThanOrEqual(-1 - 1e-12);
			})
		);
	});

	const matrix = fc.tuple(fc.integer({ min: 2, max: 8 }), fc.integer({ min: 2, max: 5 })).chain(([n, k]) =>
		fc.array(fc.array(fc.integer({ min: -50, max: 50 }), { minLength: k, maxLength: k }), {
			minLength: n,
			maxLength: n
		})
	);

	it('swapping (permuting) raters leaves every ICC unchanged', () => {
		fc.assert(
			fc.property(matrix, fc.integer({ min: 0, max: 1_000_000 }), (ratings, seed) => {
				const k = ratings[0].length;
				// A permutation of the columns derived from the seed; always includes the reversal case.
				const order = [...Array(k).keys()].reverse();
				for (let i = k - 1; i > 0; i--) {
					const j = (seed + i * 7919) % (i + 1);
					[order[i], order[j]] = [order[j], order[i]];
				}
				const permuted = ratings.map((row) => order.map((j) => row[j]));
				const a = intraclassCorrelation(ratings);
				const b = intraclassCorrelation(permuted);
				for (const form of ICC_FORMS) {
					const x = a.icc[form];
					const y = b.icc[form];
					if (x === null) expect(y, form).toBeNull();
					else expect(y!, form).toBeCloseTo(x, 9);
				}
			})
		);
	});

	it('single-rater ICCs are ≤ 1 and each average-measure form is Spearman–Brown of its single form', () => {
		fc.assert(
			fc.property(matrix, (ratings) => {
				const r = intraclassCorrelation(ratings);
				const k = r.k;
				for (const [single, average] of [
					['ICC(1,1)', 'ICC(1,k)'],
					['ICC(2,1)', 'ICC(2,k)'],
					['ICC(3,1)', 'ICC(3,k)']
				] as const) {
					const s = r.icc[single];
					const avg = r.icc[average];
					if (s === null || avg === null) continue;
					expect(s).toBeLessThanOrEqual(1 + 1e-12);
					// Spearman–Brown: ICC(·,k) = k·ICC(·,1) / (1 + (k − 1)·ICC(·,1)).
					const denominator = 1 + (k - 1) * s;
					if (Math.abs(denominator) < 1e-6) continue; // near the pole the identity is ill-conditioned
					const spearmanBrown = (k * s) / denominator;
					expect(Math.abs(avg - spearmanBrown)).toBeLessThanOrEqual(1e-9 * (1 + Math.abs(spearmanBrown)));
				}
			})
		);
	});

	it('Bland–Altman: swapping x and y flips the bias and the limits, keeps the SD', () => {
		const num = fc.double({ min: -1e6, max: 1e6, noNaN: true, noDefaultInfinity: true });
		fc.assert(
			fc.property(fc.array(fc.tuple(num, num), { minLength: 2, maxLength: 40 }), (pairs) => {
				const a = blandAltman(pairs);
				const b = blandAltman(pairs.map(([x, y]) => [y, x] as [number, number]));
				const tol = 1e-9 * (1 + Math.abs(a.bias) + a.sd);
				expect(Math.abs(b.bias + a.bias)).toBeLessThanOrEqual(tol);
				expect(Math.abs(b.sd - a.sd)).toBeLessThanOrEqual(tol);
				expect(Math.abs(b.lower + a.upper)).toBeLessThanOrEqual(tol);
				expect(Math.abs(b.upper + a.lower)).toBeLessThanOrEqual(tol);
				expect(b.n).toBe(a.n);
			})
		);
	});
});
