/**
 * The statistics of risk-based verification (src/lib/scoring/verification.ts), checked against
 * published values and against values worked out by hand (the arithmetic is written beside each).
 */
import { describe, it, expect } from 'vitest';
import {
	wilson,
	clopperPearson,
	qualifies,
	undetectedErrors,
	protocolAboveThreshold,
	policyProblems,
	DEFAULT_POLICY,
	Z95
} from '../../src/lib/scoring/verification';

describe('Wilson score interval', () => {
	// Newcombe RG (1998). Two-sided confidence intervals for the single proportion: comparison of
	// seven methods. Statistics in Medicine 17:857–872, Table II, method 3 (score). Values from
	// memory of that table, 4 decimals.
	it.each([
		[81, 263, 0.2553, 0.3662],
		[15, 148, 0.0624, 0.1605],
		[0, 20, 0.0, 0.1611],
		[1, 29, 0.0061, 0.1718]
	])('%i/%i matches Newcombe 1998 Table II (%f–%f)', (x, n, lo, hi) => {
		const w = wilson(x, n);
		expect(w.lower).toBeCloseTo(lo, 4);
		expect(w.upper).toBeCloseTo(hi, 4);
	});

	it('0 errors in 2,000 fields: upper bound z²/(n+z²) worked by hand', () => {
		// z = 1.959964, z² = 3.841459; with x = 0 the interval is [0, z²/(n + z²)]
		// = 3.841459 / 2003.841459 = 0.0019170 → 0.19170 per 100 fields
		const w = wilson(0, 2000);
		expect(w.lower).toBeCloseTo(0, 10);
		expect(w.upper).toBeCloseTo(0.001917, 6);
	});

	it('5 errors in 2,000 fields, worked by hand', () => {
		// centre = (5 + 1.920729) / 2003.841459 = 6.920729 / 2003.841459 = 0.0034537
		// half   = 1.959964 / 2003.841459 × √(5 × 1995 / 2000 + 0.960365)
		//        = 0.00097810 × √(4.9875 + 0.960365) = 0.00097810 × √5.947865 = 0.00097810 × 2.438824 = 0.0023854
		// lower = 0.0034537 − 0.0023854 = 0.0010683 ; upper = 0.0034537 + 0.0023854 = 0.0058391
		const w = wilson(5, 2000);
		expect(w.estimate).toBe(0.0025);
		expect(w.lower).toBeCloseTo(0.0010683, 6);
		expect(w.upper).toBeCloseTo(0.0058391, 6);
	});

	it('n = 0 knows nothing; bad counts are refused', () => {
		expect(wilson(0, 0)).toEqual({ estimate: 0, lower: 0, upper: 1 });
		expect(() => wilson(3, 2)).toThrow(RangeError);
		expect(() => wilson(-1, 2)).toThrow(RangeError);
		expect(() => wilson(1.5, 2)).toThrow(RangeError);
	});

	it('uses the 95% normal quantile', () => {
		// Φ⁻¹(0.975) = 1.959964 (any normal table; common practice)
		expect(Z95).toBeCloseTo(1.959964, 6);
	});
});

describe('Clopper–Pearson interval', () => {
	// Newcombe 1998 Table II, method 5 (exact); values from memory, 4 decimals.
	it.each([
		[81, 263, 0.2527, 0.3676],
		[15, 148, 0.0578, 0.1617],
		[1, 29, 0.0009, 0.1776]
	])('%i/%i matches Newcombe 1998 Table II (%f–%f)', (x, n, lo, hi) => {
		const c = clopperPearson(x, n);
		expect(c.lower).toBeCloseTo(lo, 4);
		expect(c.upper).toBeCloseTo(hi, 4);
	});

	it('x = 0 and x = n have closed forms, worked by hand', () => {
		// x = 0: upper = 1 − (α/2)^(1/n). n = 20: ln 0.025 = −3.688879; × 1/20 = −0.184444;
		// e^−0.184444 = 0.831566; upper = 0.168434
		expect(clopperPearson(0, 20).upper).toBeCloseTo(0.168434, 5);
		expect(clopperPearson(0, 20).lower).toBe(0);
		// x = n: lower = (α/2)^(1/n) = 0.831566 for n = 20
		expect(clopperPearson(20, 20).lower).toBeCloseTo(0.831566, 5);
		expect(clopperPearson(20, 20).upper).toBe(1);
	});
});

describe('qualification rule', () => {
	const policy = { minFields: 2000, thresholdPer100: 0.5 };
	it('a long clean record qualifies: 0 in 2,000 → upper 0.1917 per 100 < 0.5', () => {
		const q = qualifies(0, 2000, policy);
		expect(q.qualifies).toBe(true);
		expect(q.upperPer100).toBeCloseTo(0.1917, 4);
	});
	it('too few fields does not qualify, however clean', () => {
		const q = qualifies(0, 1999, policy);
		expect(q.qualifies).toBe(false);
		expect(q.reason).toMatch(/1999 of the 2000/);
	});
	it('5 errors in 2,000: upper 0.5839 per 100 is not below 0.5', () => {
		expect(qualifies(5, 2000, policy).qualifies).toBe(false);
	});
	it('2 errors in 2,000, worked by hand: upper 0.3639 per 100 qualifies', () => {
		// centre = (2 + 1.920729)/2003.841459 = 0.0019566; half = 0.00097810 × √(2×1998/2000 + 0.960365)
		// = 0.00097810 × √2.958365 = 0.00097810 × 1.719990 = 0.0016823; upper = 0.0036389 → 0.3639 per 100
		const q = qualifies(2, 2000, policy);
		expect(q.upperPer100).toBeCloseTo(0.3639, 3);
		expect(q.qualifies).toBe(true);
	});
	it('a sampled protocol above T: 1 raw error in 10 raw fields = 10 per 100 > 0.5', () => {
		expect(protocolAboveThreshold(1, 10, 0.5)).toBe(true);
		expect(protocolAboveThreshold(0, 10, 0.5)).toBe(false);
		// 1 error in 400 fields = 0.25 per 100, below 0.5
		expect(protocolAboveThreshold(1, 400, 0.5)).toBe(false);
	});
});

describe('undetected raw-score errors in unsampled protocols', () => {
	it('3 errors in 600 sampled raw fields, 1,800 unsampled, worked by hand', () => {
		// estimate = 3/600 × 1800 = 0.005 × 1800 = 9
		// Wilson: centre = (3 + 1.920729)/603.841459 = 0.0081490;
		//         half = 1.959964/603.841459 × √(3×597/600 + 0.960365) = 0.0032458 × √3.945365 = 0.0032458 × 1.986295 = 0.0064471
		//         [0.0017019, 0.0145961] × 1800 = [3.063, 26.273]
		const e = undetectedErrors(3, 600, 1800);
		expect(e.estimate).toBeCloseTo(9, 10);
		expect(e.wilson.lower).toBeCloseTo(3.063, 2);
		expect(e.wilson.upper).toBeCloseTo(26.273, 2);
		// Clopper–Pearson [0.0010323, 0.0145420] (beta quantiles; scipy.stats.beta.ppf gives the same) × 1800
		expect(e.clopperPearson.lower).toBeCloseTo(1.858, 2);
		expect(e.clopperPearson.upper).toBeCloseTo(26.176, 2);
	});
	it('no errors found: estimate 0, upper bound z²/(n+z²) × U', () => {
		// 3.841459 / (400 + 3.841459) = 0.0095123; × 1200 = 11.415
		const e = undetectedErrors(0, 400, 1200);
		expect(e.estimate).toBe(0);
		expect(e.wilson.upper).toBeCloseTo(11.415, 2);
		// CP: 1 − 0.025^(1/400) = 1 − e^(−3.688879/400) = 1 − e^(−0.0092222) = 0.0091798; × 1200 = 11.016
		expect(e.clopperPearson.upper).toBeCloseTo(11.016, 2);
	});
	it('nothing sampled yet: the whole unsampled count is possible', () => {
		const e = undetectedErrors(0, 0, 500);
		expect(e.wilson).toEqual({ lower: 0, upper: 500 });
	});
});

describe('policy validation', () => {
	it('accepts the defaults and names each bad setting', () => {
		expect(policyProblems({ ...DEFAULT_POLICY, mode: 'sampled' })).toEqual([]);
		const bad = policyProblems({ mode: 'sampled', minFields: 5, windowDays: 1, thresholdPer100: 0, probability: 1.5 });
		expect(bad.map((m) => m.split(':')[0])).toEqual(['minFields', 'windowDays', 'thresholdPer100', 'probability']);
	});
});
