/**
 * Rule 5 of shared/spec/reconcile.md: `alternative` on every discrepancy and the kind `follows_other_raw`.
 * Expected values are worked out by hand below. Φ values are read from a standard normal table
 * (NIST/SEMATECH e-Handbook of Statistical Methods, §1.3.6.7.1, "Cumulative distribution function of
 * the standard normal distribution"), interpolated linearly between the two-decimal entries.
 */
import { describe, expect, it } from 'vitest';
import { reconcile, testReferences, type FieldValues } from '../../src/lib/scoring';
import { NORMS, WORD_RECALL, wordRecall } from './scoring-fixtures';

// word-recall, group a30: mean 24.5, SD 4.2.
// raw 23: z = (23 − 24.5)/4.2 = −0.35714 → z −0.36; standard 100 − 15·0.35714 = 94.64 → 95;
//         scaled 10 − 3·0.35714 = 8.93 → 9; T 50 − 3.571 = 46.43 → 46;
//         percentile: Φ(0.35) = .6368, Φ(0.36) = .6406 → Φ(0.3571) ≈ .6395 → 100·(1 − .6395) = 36.05 → 36.
const REF_23 = { raw: 23, z: -0.36, standard: 95, scaled: 9, t: 46, percentile: 36 };
// raw 32: z = 7.5/4.2 = 1.78571 → z 1.79; standard 100 + 26.79 = 126.79 → 127; scaled 10 + 5.357 = 15.36 → 15;
//         T 50 + 17.86 = 67.86 → 68; percentile: Φ(1.78) = .96246, Φ(1.79) = .96327 → Φ(1.7857) ≈ .9629 → 96.
const REF_32 = { raw: 32, z: 1.79, standard: 127, scaled: 15, t: 68, percentile: 96 };

describe('rule 5: alternative and follows_other_raw', () => {
	it('the worked example: raw 23 vs 32, the second pass wrote scaled 9 → follows_other_raw, expected 15, alternative 9', () => {
		const r = reconcile(wordRecall(REF_23, { ...REF_32, scaled: 9 }));
		expect(r.discrepancies).toEqual([
			// "23"/"32": two neighbouring digits swapped; both in range, so pass both
			{ test: 'word-recall', field: 'raw', pass: 'both', kind: 'transposition', value: 23, other: 32, expected: null, alternative: null, out_of_range: false },
			{ test: 'word-recall', field: 'scaled', pass: 'second', kind: 'follows_other_raw', value: 9, other: 9, expected: 15, alternative: 9, out_of_range: false }
		]);
	});
	it('every flagged derived value carries the other raw score’s reference when the raws differ, whatever its kind', () => {
		// second pass (raw 32) wrote standard 172: the digits of 127 with 2 and 7 swapped; alternative = raw 23's standard 95
		// first pass (raw 23) wrote T 64: its own reference 46 with the digits swapped; alternative = raw 32's T 68
		const r = reconcile(wordRecall({ ...REF_23, t: 64 }, { ...REF_32, standard: 172 }));
		expect(r.discrepancies.map((d) => [d.field, d.pass, d.kind, d.expected, d.alternative])).toEqual([
			['raw', 'both', 'transposition', null, null],
			['standard', 'second', 'transposition', 127, 95],
			['t', 'first', 'transposition', 46, 68]
		]);
	});
	it('follows_other_raw wins over sign_flip when a value fits both (29 and 20 lie mirrored around the mean 24.5)', () => {
		// raw 29: z = 4.5/4.2 = 1.0714 → scaled 10 + 3.214 = 13.21 → 13; with the sign reversed 10 − 3.214 = 6.79 → 7.
		// raw 20: z = −4.5/4.2 = −1.0714 → scaled 7; standard 100 − 16.07 = 83.93 → 84; T 50 − 10.71 = 39.29 → 39;
		//         percentile 100·(1 − Φ(1.0714)): Φ(1.07) = .8577, Φ(1.08) = .8599 → .8580 → 14.2 → 14.
		const ref20: FieldValues = { raw: 20, z: -1.07, standard: 84, scaled: 7, t: 39, percentile: 14 };
		const r = reconcile(wordRecall({ scaled: 7 }, ref20));
		expect(r.discrepancies.map((d) => [d.field, d.pass, d.kind, d.expected, d.alternative])).toEqual([
			['raw', 'both', 'wrong_digit', null, null], // "29"/"20": same length, one digit differs
			['scaled', 'first', 'follows_other_raw', 13, 7]
		]);
		// with equal raw scores the same value is a sign_flip and has no alternative
		const same = reconcile(wordRecall({ scaled: 7 }));
		expect(same.discrepancies.map((d) => [d.field, d.kind, d.alternative])).toEqual([['scaled', 'sign_flip', null]]);
	});
	it('no alternative when the raw scores agree, or when one of them is unusable (rule 3)', () => {
		const agree = reconcile(wordRecall({ standard: 161 }));
		expect(agree.discrepancies.map((d) => d.alternative)).toEqual([null]);
		// second raw 92 is outside 0–48: its derived fields have no reference; the first pass's values are right
		const oneBad = reconcile(wordRecall({ scaled: 9 }, { raw: 92 }));
		expect(oneBad.discrepancies.map((d) => [d.field, d.pass, d.kind, d.expected, d.alternative])).toEqual([
			['raw', 'second', 'transposition', null, null],
			['scaled', 'first', 'mismatch', 13, null],
			['scaled', 'both', 'mismatch', null, null]
		]);
	});
	it('a shared wrong value with different raw scores but equal references: one "both", alternative the first pass’s', () => {
		// raw 48: z = 23.5/4.2 = 5.595 → standard 183.9, clamped to 160; raw 47: z = 22.5/4.2 = 5.357 → 180.4 → 160.
		// Both wrote 106: the digits of 160 with 6 and 0 swapped. The first pass's alternative is raw 47's 160.
		const doc = wordRecall({ raw: 48, standard: 106 }, { raw: 47, standard: 106 }, { test: { reported: ['standard'] } });
		expect(reconcile(doc).discrepancies).toEqual([
			{ test: 'word-recall', field: 'raw', pass: 'both', kind: 'wrong_digit', value: 48, other: 47, expected: null, alternative: null, out_of_range: false },
			{
				test: 'word-recall',
				field: 'standard',
				pass: 'both',
				kind: 'transposition',
				value: 106,
				other: 106,
				expected: 160,
				alternative: 160,
				out_of_range: false
			}
		]);
	});
});

describe('testReferences: a test’s references for a given raw score (for re-judging after a raw decision)', () => {
	const a30 = NORMS[1];
	it('gives every derived field from the raw score through the norm', () => {
		const { raw: _r23, ...d23 } = REF_23;
		const { raw: _r32, ...d32 } = REF_32;
		expect(testReferences(WORD_RECALL, a30, 23)).toEqual(d23);
		expect(testReferences(WORD_RECALL, a30, '32')).toEqual(d32);
	});
	it('null when the raw score is empty, not a number, or outside the test’s range', () => {
		for (const raw of [null, '', 'x', 49, -1, 23.5]) expect(testReferences(WORD_RECALL, a30, raw)).toBeNull();
	});
});
