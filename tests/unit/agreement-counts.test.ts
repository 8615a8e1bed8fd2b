/**
 * Kappa and Bland–Altman from counted pairs (cohenKappaFromCounts, blandAltmanFromCounts): the
 * Audit's summaries hold counts per label pair and per (first, second) value, not one row per pair
 * (issue 18). Hand-worked figures, and the property that matters for the reports: the result is
 * the same, to the last bit, as the list-based function on the pairs the counts stand for.
 */
import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import { blandAltman, blandAltmanFromCounts, cohenKappa, cohenKappaFromCounts, type KappaWeights } from '../../src/lib/scoring/agreement';
import { thrown } from './agreement-fixtures';

const expand = <T>(cells: ReadonlyArray<readonly [T, T, number]>): Array<[T, T]> =>
	cells.flatMap(([a, b, c]) => Array.from({ length: c }, () => [a, b] as [T, T]));

describe('cohenKappaFromCounts', () => {
	it('a 2 × 2 table by hand: 20 (yes, yes), 5 (yes, no), 10 (no, yes), 15 (no, no)', () => {
		// pₒ = 35/50 = 0.7; marginals rater 1: 25, 25; rater 2: 30, 20; pₑ = (25·30 + 25·20)/50² = 0.5; κ = 0.2/0.5 = 0.4
		const r = cohenKappaFromCounts(
			[
				['yes', 'yes', 20],
				['yes', 'no', 5],
				['no', 'yes', 10],
				['no', 'no', 15]
			],
			{ categories: ['yes', 'no'] }
		);
		expect(r.n).toBe(50);
		expect(r.observed).toBeCloseTo(0.7, 12);
		expect(r.expected).toBeCloseTo(0.5, 12);
		expect(r.kappa!).toBeCloseTo(0.4, 12);
	});

	it('one pair in each of three first-pass categories, all second-pass average: κ = 0 (pₒ = pₑ = 1/3)', () => {
		const r = cohenKappaFromCounts(
			[
				['average', 'average', 1],
				['high', 'average', 1],
				['low', 'average', 1]
			],
			{ categories: ['high', 'average', 'low'] }
		);
		expect(r.observed).toBeCloseTo(1 / 3, 12);
		expect(r.expected).toBeCloseTo(1 / 3, 12);
		expect(r.kappa!).toBeCloseTo(0, 12);
	});

	it('a label pair split over several cells counts once in total; cells of 0 pairs are skipped', () => {
		const split = cohenKappaFromCounts(
			[
				['a', 'a', 3],
				['a', 'b', 0],
				['b', 'b', 1],
				['a', 'a', 2]
			],
			{ categories: ['a', 'b'] }
		);
		expect(split).toEqual(cohenKappa(expand([['a', 'a', 5] as const, ['b', 'b', 1] as const]), { categories: ['a', 'b'] }));
	});

	it('equals cohenKappa on the expanded pairs exactly, every weighting, with and without categories (property)', () => {
		const label = fc.constantFrom('a', 'b', 'c', 'd', 'e');
		const cells = fc.array(fc.tuple(label, label, fc.integer({ min: 0, max: 40 })), { minLength: 1, maxLength: 30 });
		fc.assert(
			fc.property(cells, fc.constantFrom<KappaWeights>('none', 'linear', 'quadratic'), fc.boolean(), (cs, weights, withCategories) => {
				const pairs = expand(cs);
				fc.pre(pairs.length > 0 && (withCategories || weights === 'none'));
				const options = { weights, ...(withCategories ? { categories: ['a', 'b', 'c', 'd', 'e'] } : {}) };
				expect(cohenKappaFromCounts(cs, options)).toEqual(cohenKappa(pairs, options));
			})
		);
	});

	it('refuses bad counts, unknown labels and an empty table with the offending path', () => {
		expect(thrown(() => cohenKappaFromCounts([['a', 'a', -1]])).path).toBe('cells[0][2]');
		expect(thrown(() => cohenKappaFromCounts([['a', 'a', 1.5]])).path).toBe('cells[0][2]');
		expect(thrown(() => cohenKappaFromCounts([['a', 'z', 2]], { categories: ['a'] })).path).toBe('cells[0][1]');
		expect(thrown(() => cohenKappaFromCounts([['a', 'a', 0]])).path).toBe('cells');
		expect(thrown(() => cohenKappaFromCounts([])).path).toBe('cells');
	});
});

describe('blandAltmanFromCounts', () => {
	it('three pairs by hand: (100, 100), (110, 100), (85, 90)', () => {
		// d = 0, 10, −5; bias = 5/3; Σ(d − bias)² = (25 + 625 + 400)/9 = 1050/9; sd = √(1050/9/2) = √58.333… = 7.6376
		const r = blandAltmanFromCounts([
			[100, 100, 1],
			[110, 100, 1],
			[85, 90, 1]
		]);
		expect(r.n).toBe(3);
		expect(r.bias).toBeCloseTo(5 / 3, 12);
		expect(r.sd).toBeCloseTo(Math.sqrt(1050 / 18), 12);
		expect(r.sd).toBeCloseTo(7.6376, 4);
		expect(r.lower).toBeCloseTo(5 / 3 - 1.96 * Math.sqrt(1050 / 18), 12);
	});

	it('equals blandAltman on the expanded pairs to the last bit, decimals included (property)', () => {
		const value = fc.integer({ min: -4000, max: 4000 }).map((v) => v / 100);
		const cells = fc.array(fc.tuple(value, value, fc.integer({ min: 0, max: 30 })), { minLength: 1, maxLength: 40 });
		fc.assert(
			fc.property(cells, (cs) => {
				const pairs = expand(cs);
				fc.pre(pairs.length >= 2);
				expect(blandAltmanFromCounts(cs)).toEqual(blandAltman(pairs));
			})
		);
	});

	it('refuses fewer than two pairs, bad counts and values that are not finite numbers', () => {
		expect(thrown(() => blandAltmanFromCounts([[1, 2, 1]])).path).toBe('cells');
		expect(thrown(() => blandAltmanFromCounts([[1, 2, -2]])).path).toBe('cells[0][2]');
		expect(thrown(() => blandAltmanFromCounts([[1, Number.NaN, 3]])).path).toBe('cells[0][1]');
	});
});
