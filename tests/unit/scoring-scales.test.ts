import { describe, expect, it } from 'vitest';
import fc from 'fast-check';
import {
	DERIVED_FIELDS,
	SCALES,
	ceilTo,
	floorTo,
	formatReference,
	inBounds,
	normalCdf,
	parseEntered,
	rawInRange,
	referenceScore,
	referenceScores,
	roundHalfAway,
	roundTo,
	unroundedScore,
	writtenForm,
	zFromRaw
} from '../../src/lib/scoring';

describe('standard normal CDF Φ (jstat) against published tables', () => {
	// Abramowitz & Stegun (1964), Handbook of Mathematical Functions, Table 26.1: P(x) to 15 decimals,
	// x = 0.00(0.02)3.00 among others; Φ(−x) = 1 − P(x) (A&S 26.2.5).
	const AS_26_1: [number, number][] = [
		[0, 0.5],
		[0.5, 0.691462461274013],
		[1, 0.841344746068543],
		[1.96, 0.97500210485178],
		[2, 0.977249868051821],
		[3, 0.99865010196837]
	];
	for (const [x, p] of AS_26_1) {
		it(`Φ(${x}) = ${p} (A&S 1964, Table 26.1)`, () => {
			expect(Math.abs(normalCdf(x) - p)).toBeLessThan(1e-12);
		});
		if (x !== 0) {
			it(`Φ(−${x}) = 1 − ${p} (A&S 1964, Table 26.1 with 26.2.5)`, () => {
				expect(Math.abs(normalCdf(-x) - (1 - p))).toBeLessThan(1e-12);
			});
		}
	}

	// NIST/SEMATECH e-Handbook of Statistical Methods, 1.3.6.7.1 "Cumulative distribution function of
	// the standard normal distribution": area from 0 to z, 5 decimals.
	const NIST_AREA_0_TO_Z: [number, number][] = [
		[0.5, 0.19146],
		[1.0, 0.34134],
		[1.64, 0.4495],
		[1.65, 0.45053],
		[1.96, 0.475],
		[2.0, 0.47725],
		[3.0, 0.49865]
	];
	for (const [z, area] of NIST_AREA_0_TO_Z) {
		it(`Φ(${z}) − 0.5 = ${area} (NIST/SEMATECH e-Handbook 1.3.6.7.1)`, () => {
			expect(Math.abs(normalCdf(z) - 0.5 - area)).toBeLessThanOrEqual(5e-6);
		});
	}

	it('Φ(1.645) = 0.95 to 4 decimals: 1.645 is the one-sided 5 % critical value (NIST/SEMATECH 1.3.6.7.1)', () => {
		expect(normalCdf(1.645)).toBeCloseTo(0.95, 4);
		expect(normalCdf(-1.645)).toBeCloseTo(0.05, 4);
	});
	it('Φ(−1.96) = 0.025 to 4 decimals: two-sided 95 % critical value (NIST/SEMATECH 1.3.6.7.1)', () => {
		expect(normalCdf(-1.96)).toBeCloseTo(0.025, 4);
	});
	it('Φ(−1) and Φ(−3) (A&S 1964, Table 26.1)', () => {
		expect(normalCdf(-1)).toBeCloseTo(0.158655253931457, 12);
		expect(normalCdf(-3)).toBeCloseTo(0.00134989803163, 12);
	});
});

describe('R: round half away from zero with a 1e-9 tie tolerance (spec: Scales)', () => {
	it('rounds .5 away from zero on both sides', () => {
		expect(roundHalfAway(2.5)).toBe(3);
		expect(roundHalfAway(-2.5)).toBe(-3);
		expect(roundHalfAway(2.4999)).toBe(2);
		expect(roundHalfAway(-2.4999)).toBe(-2);
		expect(roundHalfAway(0)).toBe(0);
	});
	it('122.49999999999997 rounds to 123 (spec example)', () => {
		expect(roundHalfAway(122.49999999999997)).toBe(123);
		expect(roundHalfAway(122.4999999)).toBe(122); // 1e-7 below the tie is not on it
	});
	it('100 + 15 × 1.5 rounds to 123 however the floating point lands (spec: word-recall a40)', () => {
		const z = (29 - 22.1) / 4.6;
		expect(referenceScore('standard', z)).toBe(123);
		expect(referenceScore('scaled', z)).toBe(15);
	});
	it('rounds z to two decimals half away from zero', () => {
		expect(roundTo(1.005, 2)).toBe(1.01); // 1.005 * 100 is 100.49999999999999
		expect(roundTo(-1.005, 2)).toBe(-1.01);
		expect(roundTo(1.0714285, 2)).toBe(1.07);
	});
	it('floor and ceiling at a precision ignore floating-point noise', () => {
		expect(floorTo(1.07, 2)).toBe(1.07);
		expect(ceilTo(1.07, 2)).toBe(1.07);
		expect(floorTo(1.0714, 2)).toBe(1.07);
		expect(ceilTo(1.0714, 2)).toBe(1.08);
	});
});

describe('references (spec: Scales table)', () => {
	it('z from raw, mean, SD; sign reversed for lower_better (spec: speeded-match example)', () => {
		expect(zFromRaw(36, 42, 6, 'lower_better')).toBe(1);
		expect(zFromRaw(36, 42, 6, 'higher_better')).toBe(-1);
	});
	it('speeded-match raw 36: z 1.00, standard 115, scaled 13, T 60, percentile 84 (spec worked example)', () => {
		expect(referenceScores(zFromRaw(36, 42, 6, 'lower_better'))).toEqual({ z: 1, standard: 115, scaled: 13, t: 60, percentile: 84 });
	});
	it('word-recall raw 29 in a30: z 1.07, standard 116, scaled 13, T 61, percentile 86 (spec worked example)', () => {
		expect(referenceScores(zFromRaw(29, 24.5, 4.2, 'higher_better'))).toEqual({ z: 1.07, standard: 116, scaled: 13, t: 61, percentile: 86 });
	});
	it('derived scores come from the unrounded z, not from the rounded one', () => {
		// z = 0.8333…: rounded first to 0.83 it would give scaled R(12.49) = 12; unrounded it gives R(12.5) = 13
		const z = 2.5 / 3;
		expect(referenceScore('z', z)).toBe(0.83);
		expect(referenceScore('scaled', z)).toBe(13);
		expect(roundHalfAway(10 + 3 * 0.83)).toBe(12);
	});
	it('clamps standard, scaled and T to their bounds, percentile to 1–99; z is only rounded', () => {
		expect(referenceScore('standard', 5)).toBe(160);
		expect(referenceScore('standard', -5)).toBe(40);
		expect(referenceScore('scaled', 4)).toBe(19);
		expect(referenceScore('scaled', -4)).toBe(1);
		expect(referenceScore('t', 4)).toBe(80);
		expect(referenceScore('t', -4)).toBe(20);
		expect(referenceScore('percentile', 3)).toBe(99);
		expect(referenceScore('percentile', -3)).toBe(1);
		expect(referenceScore('z', 6.123)).toBe(6.12);
	});
	it('per-test bounds override the defaults', () => {
		expect(referenceScore('t', 4, { t: [10, 90] })).toBe(90);
		expect(referenceScore('standard', 5, { standard: [45, 155] })).toBe(155);
		expect(inBounds('t', 85, { t: [10, 90] })).toBe(true);
		expect(inBounds('t', 85)).toBe(false);
	});
	it('percentile is valid above 0 and below 100 (spec: Scales table)', () => {
		expect(inBounds('percentile', 0)).toBe(false);
		expect(inBounds('percentile', 0.5)).toBe(true);
		expect(inBounds('percentile', 99.9)).toBe(true);
		expect(inBounds('percentile', 100)).toBe(false);
	});
	it('raw range includes the number of decimals (spec: valid values of raw)', () => {
		const raw = { min: 0, max: 300, decimals: 1 };
		expect(rawInRange(36.2, raw)).toBe(true);
		expect(rawInRange(36.25, raw)).toBe(false);
		expect(rawInRange(300, raw)).toBe(true);
		expect(rawInRange(300.1, raw)).toBe(false);
		expect(rawInRange(-0.1, raw)).toBe(false);
	});
	it('formats references at their precision for the digit kinds (spec: Kinds)', () => {
		expect(formatReference('z', 1.07)).toBe('1.07');
		expect(formatReference('z', -0.3)).toBe('-0.30');
		expect(formatReference('z', 1)).toBe('1.00');
		expect(formatReference('standard', 115)).toBe('115');
	});
});

describe('entered values (spec: Values are JSON numbers or strings as typed)', () => {
	it('reads numbers, numeric strings, and empties', () => {
		expect(parseEntered(36)).toBe(36);
		expect(parseEntered('36')).toBe(36);
		expect(parseEntered(' -1.00 ')).toBe(-1);
		expect(parseEntered('\u22121.5')).toBe(-1.5);
		expect(parseEntered('.5')).toBe(0.5);
		expect(parseEntered(null)).toBeNull();
		expect(parseEntered(undefined)).toBeNull();
		expect(parseEntered('')).toBeNull();
		expect(parseEntered('  ')).toBeNull();
	});
	it('refuses what JavaScript would coerce but a scorer did not type as a number', () => {
		for (const s of ['0x10', '1e2', 'Infinity', 'abc', '1,5', '--1']) expect(parseEntered(s)).toBeNaN();
	});
	it('accepts "<1" and ">99" as 1 and 99 for percentiles only (spec: Scales table)', () => {
		expect(parseEntered('<1', 'percentile')).toBe(1);
		expect(parseEntered('>99', 'percentile')).toBe(99);
		expect(parseEntered('<1', 'standard')).toBeNaN();
	});
	it('keeps the digits as written', () => {
		expect(writtenForm('-0.30')).toBe('-0.30');
		expect(writtenForm(-0.3)).toBe('-0.3');
		expect(writtenForm('>99')).toBe('99');
	});
});

describe('facts of the trade (common practice)', () => {
	it('+2 SD is about the 98th percentile (common practice)', () => {
		expect(referenceScore('percentile', 2)).toBe(98);
		expect(referenceScore('standard', 2)).toBe(130);
	});
	it('−2 SD is about the 2nd percentile (common practice)', () => {
		expect(referenceScore('percentile', -2)).toBe(2);
	});
	it('scaled 10 = standard 100 = T 50 = 50th percentile at the mean (common practice)', () => {
		expect(referenceScores(0)).toEqual({ z: 0, standard: 100, scaled: 10, t: 50, percentile: 50 });
	});
	it('T-scores have mean 50 and SD 10; standard 100/15; scaled 10/3 (common practice)', () => {
		expect(SCALES.t).toMatchObject({ mean: 50, sd: 10 });
		expect(SCALES.standard).toMatchObject({ mean: 100, sd: 15 });
		expect(SCALES.scaled).toMatchObject({ mean: 10, sd: 3 });
		expect(referenceScore('t', 1)).toBe(60);
		expect(referenceScore('t', -1)).toBe(40);
	});
	it('+1 SD: standard 115, scaled 13, T 60, 84th percentile (common practice)', () => {
		expect(referenceScores(1)).toEqual({ z: 1, standard: 115, scaled: 13, t: 60, percentile: 84 });
	});
});

describe('properties', () => {
	const zArb = fc.double({ min: -6, max: 6, noNaN: true });
	it('reversing the direction negates z exactly (fast-check)', () => {
		fc.assert(
			fc.property(
				fc.double({ min: -500, max: 500, noNaN: true }),
				fc.double({ min: -500, max: 500, noNaN: true }),
				fc.double({ min: 0.01, max: 100, noNaN: true }),
				(raw, mean, sd) => {
					expect(zFromRaw(raw, mean, sd, 'lower_better')).toBe(-zFromRaw(raw, mean, sd, 'higher_better'));
				}
			)
		);
	});
	it('reversing the direction mirrors every scale around its mean before clamping (fast-check)', () => {
		fc.assert(
			fc.property(zArb, (z) => {
				for (const f of ['z', 'standard', 'scaled', 't'] as const) {
					const m = SCALES[f].mean as number;
					expect(unroundedScore(f, -z) - m).toBeCloseTo(-(unroundedScore(f, z) - m), 9);
				}
				// percentile mirrors around 50: 100·Φ(−z) = 100 − 100·Φ(z)
				expect(unroundedScore('percentile', -z)).toBeCloseTo(100 - unroundedScore('percentile', z), 9);
			})
		);
	});
	it('rounded references mirror too wherever the value is not on a .5 tie (ties round away from zero, i.e. up on these positive scales) (fast-check)', () => {
		fc.assert(
			fc.property(fc.double({ min: -2.5, max: 2.5, noNaN: true }), (z) => {
				for (const f of DERIVED_FIELDS) {
					const u = unroundedScore(f, z) * (f === 'z' ? 100 : 1);
					const frac = Math.abs(u - Math.trunc(u));
					fc.pre(Math.abs(frac - 0.5) > 1e-6);
					const m = f === 'percentile' ? 50 : (SCALES[f].mean as number);
					expect(referenceScore(f, -z) - m).toBeCloseTo(-(referenceScore(f, z) - m), 9);
				}
			})
		);
	});
	it('every reference lies inside its scale bounds, except z which is only rounded (fast-check)', () => {
		fc.assert(
			fc.property(zArb, (z) => {
				for (const f of ['standard', 'scaled', 't', 'percentile'] as const) expect(inBounds(f, referenceScore(f, z))).toBe(true);
			})
		);
	});
});
