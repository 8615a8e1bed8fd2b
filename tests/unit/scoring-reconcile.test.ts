import { describe, expect, it } from 'vitest';
import { RAW_PAIR_KINDS, reconcile, type Discrepancy, type FieldValues, type NormDef, type ReconcileInput } from '../../src/lib/scoring';
import { NORMS, specExample, wordRecall, WR_REF } from './scoring-fixtures';

function only(doc: ReconcileInput): Discrepancy {
	const r = reconcile(doc);
	expect(r.discrepancies, JSON.stringify(r.discrepancies)).toHaveLength(1);
	return r.discrepancies[0];
}

/** The single discrepancy when only the first pass deviates from the reference. */
function firstOnly(first: FieldValues, opts?: Parameters<typeof wordRecall>[2]): Discrepancy {
	const d = only(wordRecall(first, {}, opts));
	expect(d.pass).toBe('first');
	return d;
}

describe('spec worked examples (shared/spec/reconcile.md)', () => {
	it('speeded-match batch example: 10 discrepancies, fields_compared 12, the first as shown', () => {
		const r = reconcile(specExample());
		expect(r.summary).toEqual({ fields_compared: 12, discrepancies: 10 });
		expect(r.discrepancies[0]).toEqual({
			test: 'speeded-match',
			field: 'z',
			pass: 'first',
			kind: 'sign_flip',
			value: '-1.00',
			other: null,
			expected: 1,
			alternative: null,
			out_of_range: false
		});
	});
	it('speeded-match: z −1.00 and scaled 7 are sign_flips, standard 151 a transposition, empties missing', () => {
		const r = reconcile(specExample());
		expect(r.discrepancies.map((d) => [d.field, d.pass, d.kind, d.expected])).toEqual([
			['z', 'first', 'sign_flip', 1],
			['z', 'second', 'missing', 1],
			['standard', 'first', 'missing', 115],
			['standard', 'second', 'transposition', 115],
			['scaled', 'first', 'sign_flip', 13],
			['scaled', 'second', 'missing', 13],
			['t', 'first', 'missing', 60],
			['t', 'second', 'missing', 60],
			['percentile', 'first', 'missing', 84],
			['percentile', 'second', 'missing', 84]
		]);
		// the raw scores 36 and "36" agree: no raw discrepancy
		expect(r.discrepancies.some((d) => d.field === 'raw')).toBe(false);
	});
	it('word-recall raw 29 in a30 with the right values: no discrepancies', () => {
		expect(reconcile(wordRecall()).summary).toEqual({ fields_compared: 12, discrepancies: 0 });
	});
	it('word-recall: scaled 15 is wrong_norm_group (a40 gives 15)', () => {
		const d = firstOnly({ scaled: 15 });
		expect(d).toMatchObject({ field: 'scaled', kind: 'wrong_norm_group', expected: 13, out_of_range: false });
	});
	it('word-recall: T 16 is a transposition with out_of_range true', () => {
		const d = firstOnly({ t: 16 });
		expect(d).toMatchObject({ field: 't', kind: 'transposition', expected: 61, out_of_range: true });
	});
});

describe('every kind, with values that fit it (word-recall raw 29: z 1.07, SS 116, scaled 13, T 61, %ile 86)', () => {
	const cases: [string, FieldValues, string, Discrepancy['kind'], boolean][] = [
		['missing: left empty ("")', { standard: '' }, 'standard', 'missing', false],
		['missing: null', { percentile: null }, 'percentile', 'missing', false],
		['sign_flip: z −1.07', { z: '-1.07' }, 'z', 'sign_flip', false],
		['sign_flip: standard 84 = R(100 − 16.07)', { standard: 84 }, 'standard', 'sign_flip', false],
		['sign_flip: percentile 14', { percentile: 14 }, 'percentile', 'sign_flip', false],
		['wrong_norm_group: standard 123 (a40, z 1.5, half away from zero)', { standard: 123 }, 'standard', 'wrong_norm_group', false],
		['wrong_norm_group: z 1.50', { z: '1.50' }, 'z', 'wrong_norm_group', false],
		['wrong_scale: T-score 61 in the standard field', { standard: 61 }, 'standard', 'wrong_scale', false],
		['wrong_scale: percentile 86 in the T field (out of range too)', { t: 86 }, 't', 'wrong_scale', true],
		['wrong_scale: standard 116 in the z field', { z: 116 }, 'z', 'wrong_scale', true],
		['raw_as_derived: raw 29 in the standard field', { standard: 29 }, 'standard', 'raw_as_derived', true],
		['decimal_shift: z 10.7', { z: '10.7' }, 'z', 'decimal_shift', true],
		['decimal_shift: percentile 8.6', { percentile: 8.6 }, 'percentile', 'decimal_shift', false],
		['transposition: standard 161', { standard: 161 }, 'standard', 'transposition', true],
		['transposition: percentile 68', { percentile: 68 }, 'percentile', 'transposition', false],
		['transposition across the decimal point: z 10.7 is a shift, 1.70 a transposition of 1.07', { z: '1.70' }, 'z', 'transposition', false],
		['rounding: standard 117 (ceiling of 116.07)', { standard: 117 }, 'standard', 'rounding', false],
		['rounding: z 1.08 (ceiling at 2 decimals)', { z: '1.08' }, 'z', 'rounding', false],
		['rounding: z 1.1 (z rounded to one decimal)', { z: 1.1 }, 'z', 'rounding', false],
		['digit_drop: standard 16 (116 without a 1)', { standard: 16 }, 'standard', 'digit_drop', true],
		['digit_drop: z 1.7 (1.07 without the 0)', { z: 1.7 }, 'z', 'digit_drop', false],
		['digit_extra: z 1.073', { z: '1.073' }, 'z', 'digit_extra', false],
		['digit_extra: standard 1116', { standard: 1116 }, 'standard', 'digit_extra', true],
		['wrong_digit: standard 146', { standard: 146 }, 'standard', 'wrong_digit', false],
		['wrong_digit: percentile 36', { percentile: 36 }, 'percentile', 'wrong_digit', false],
		['out_of_range: standard 200', { standard: 200 }, 'standard', 'out_of_range', true],
		['out_of_range: percentile 0', { percentile: 0 }, 'percentile', 'out_of_range', true],
		['out_of_range: scaled 25', { scaled: 25 }, 'scaled', 'out_of_range', true],
		['mismatch: standard 100', { standard: 100 }, 'standard', 'mismatch', false],
		['mismatch: z 0.40', { z: '0.40' }, 'z', 'mismatch', false]
	];
	for (const [title, first, field, kind, oor] of cases) {
		it(title, () => {
			const d = firstOnly(first);
			expect(d.field).toBe(field);
			expect(d.kind).toBe(kind);
			expect(d.out_of_range).toBe(oor);
			expect(d.expected).toBe(WR_REF[field as keyof typeof WR_REF]);
			expect(d.value).toBe(first[field as keyof FieldValues] === '' ? null : first[field as keyof FieldValues]);
			expect(d.other).toBe(WR_REF[field as keyof typeof WR_REF]);
		});
	}
});

describe('values that fit two kinds: the first in the spec order wins', () => {
	it('sign_flip before wrong_norm_group: scaled 7 is also what group a50 gives', () => {
		const norms: NormDef[] = [...NORMS.filter((n) => n.test === 'word-recall'), { test: 'word-recall', group: 'a50', mean: 34, sd: 4.6 }];
		expect(firstOnly({ scaled: 7 }, { norms }).kind).toBe('sign_flip');
	});
	it('wrong_norm_group before wrong_scale: standard 86 is group x’s standard and this pass’s percentile', () => {
		const norms: NormDef[] = [...NORMS.filter((n) => n.test === 'word-recall'), { test: 'word-recall', group: 'x', mean: 32.92, sd: 4.2 }];
		expect(firstOnly({ standard: 86 }, { norms }).kind).toBe('wrong_norm_group');
		expect(firstOnly({ standard: 86 }).kind).toBe('wrong_scale');
	});
	it('wrong_scale before out_of_range: scaled 13 in the T field', () => {
		expect(firstOnly({ t: 13 })).toMatchObject({ kind: 'wrong_scale', out_of_range: true });
	});
	it('decimal_shift before digit_extra: standard 1160', () => {
		expect(firstOnly({ standard: 1160 }).kind).toBe('decimal_shift');
	});
	it('transposition before out_of_range: T 16 (spec)', () => {
		expect(firstOnly({ t: 16 }).kind).toBe('transposition');
	});
	it('rounding before wrong_digit: standard 117, z 1.08', () => {
		expect(firstOnly({ standard: 117 }).kind).toBe('rounding');
		expect(firstOnly({ z: '1.08' }).kind).toBe('rounding');
	});
	it('digit_drop before out_of_range: standard 16', () => {
		expect(firstOnly({ standard: 16 })).toMatchObject({ kind: 'digit_drop', out_of_range: true });
	});
	it('raw_as_derived before wrong_digit: scaled 19 when the raw score is 19 and the reference 18', () => {
		// raw 19, norms mean 5 sd 3 → z 4.67 → scaled R(24) clamped to 19 … pick norms giving scaled 18: z 2.67 → mean 11, sd 3
		const norms: NormDef[] = [{ test: 'word-recall', group: 'a30', mean: 11, sd: 3 }];
		const doc = wordRecall({ raw: 19, scaled: 19 }, { raw: 19, scaled: 18 }, { norms });
		const d = reconcile(doc).discrepancies.filter((x) => x.field === 'scaled');
		expect(d).toHaveLength(1);
		expect(d[0]).toMatchObject({ pass: 'first', kind: 'raw_as_derived', expected: 18 });
	});
});

describe('agreement: equal values are never flagged', () => {
	it('"1.070", 1.07 and "+1.07" all equal z 1.07; "116" equals 116', () => {
		expect(reconcile(wordRecall({ z: '1.070', standard: '116' }, { z: '+1.07' })).discrepancies).toEqual([]);
	});
	it('"<1" equals a percentile reference of 1, ">99" one of 99', () => {
		const norms: NormDef[] = [{ test: 'word-recall', group: 'a30', mean: 40, sd: 3 }];
		// raw 29: z −3.67 → percentile R(0.012) → 1, standard 45, scaled 1 (clamped), T 20 (clamped 13.3)
		const low = wordRecall(
			{ z: '-3.67', standard: 45, scaled: 1, t: 20, percentile: '<1' },
			{ z: -3.67, standard: 45, scaled: 1, t: 20, percentile: 1 },
			{ norms }
		);
		expect(reconcile(low).discrepancies).toEqual([]);
		const highNorms: NormDef[] = [{ test: 'word-recall', group: 'a30', mean: 10, sd: 5 }];
		const high = wordRecall(
			{ z: '3.80', standard: 157, scaled: 19, t: 80, percentile: '>99' },
			{ z: 3.8, standard: 157, scaled: 19, t: 80, percentile: 99 },
			{ norms: highNorms }
		);
		expect(reconcile(high).discrepancies).toEqual([]);
	});
	it('only reported fields are compared', () => {
		const doc = wordRecall({ percentile: 3, t: 9 }, {}, { test: { reported: ['z', 'standard', 'scaled'] } });
		expect(reconcile(doc)).toEqual({ discrepancies: [], summary: { fields_compared: 8, discrepancies: 0 } });
	});
});

describe('raw pairs (spec: Comparing two passes, rule 1)', () => {
	const raw = (a: FieldValues['raw'], b: FieldValues['raw']) => reconcile(wordRecall({ raw: a }, { raw: b })).discrepancies.filter((d) => d.field === 'raw');
	it('transposition 29/92 where 92 is out of range: pass second, out_of_range true', () => {
		expect(raw(29, 92)).toEqual([
			{ test: 'word-recall', field: 'raw', pass: 'second', kind: 'transposition', value: 92, other: 29, expected: null, alternative: null, out_of_range: true }
		]);
	});
	it('both in range and different: pass both (nobody knows which is right)', () => {
		expect(raw(29, 39)[0]).toMatchObject({ pass: 'both', kind: 'wrong_digit', value: 29, other: 39, out_of_range: false });
		expect(raw(29, 17)[0]).toMatchObject({ pass: 'both', kind: 'mismatch' });
		expect(raw(29, 2)[0]).toMatchObject({ pass: 'both', kind: 'digit_drop' });
		expect(raw(2, 29)[0]).toMatchObject({ pass: 'both', kind: 'digit_drop' }); // either value is the other with a digit left out
		expect(raw(29, '92')[0]).toMatchObject({ pass: 'second', kind: 'transposition' });
		expect(raw(12, 21)[0]).toMatchObject({ pass: 'both', kind: 'transposition' });
	});
	it('decimal_shift: 29 and 2.9 (raw has no decimals on this test, so 2.9 is impossible)', () => {
		expect(raw(29, 2.9)[0]).toMatchObject({ pass: 'second', kind: 'decimal_shift', out_of_range: true });
	});
	it('missing in one pass: pass is the one that is missing', () => {
		expect(raw(null, 29)[0]).toMatchObject({ pass: 'first', kind: 'missing', value: null, other: 29, out_of_range: false });
		expect(raw(29, '')[0]).toMatchObject({ pass: 'second', kind: 'missing', value: null, other: 29 });
	});
	it('missing in one and out of range in the other: pass both', () => {
		expect(raw(null, 60)[0]).toMatchObject({ pass: 'both', kind: 'missing', out_of_range: true });
	});
	it('the same impossible raw score in both: one discrepancy, pass both, out_of_range', () => {
		expect(raw(60, '60')).toEqual([
			{ test: 'word-recall', field: 'raw', pass: 'both', kind: 'out_of_range', value: 60, other: '60', expected: null, alternative: null, out_of_range: true }
		]);
	});
	it('two different impossible raw scores: pass both, out_of_range', () => {
		expect(raw(50, 73)[0]).toMatchObject({ pass: 'both', kind: 'out_of_range', out_of_range: true });
	});
	it('no raw score in either pass: one missing discrepancy, pass both (our choice)', () => {
		expect(raw(null, null)).toEqual([
			{ test: 'word-recall', field: 'raw', pass: 'both', kind: 'missing', value: null, other: null, expected: null, alternative: null, out_of_range: false }
		]);
	});
	it('raw kinds are only those the spec lists for raw pairs; 29/299 is digit_drop either way round', () => {
		expect(raw(29, 290)[0].kind).toBe('decimal_shift');
		expect(raw(29, 299)[0].kind).toBe('digit_drop');
		expect(raw(299, 29)[0].kind).toBe('digit_drop');
		const seen = new Set<string>();
		for (let b = 0; b <= 400; b++) if (b !== 29) seen.add(raw(29, b)[0].kind);
		for (const b of [null, 2.9, 0.29, 'x']) seen.add(raw(29, b as FieldValues['raw'])[0].kind);
		for (const k of seen) expect(RAW_PAIR_KINDS).toContain(k);
		expect([...seen].sort()).toEqual(['decimal_shift', 'digit_drop', 'mismatch', 'missing', 'out_of_range', 'transposition', 'wrong_digit']);
	});
});

describe('derived fields against each pass’s own raw score (rules 2 and 3)', () => {
	it('different raw scores: each pass is checked against the reference from its own raw score', () => {
		// first: raw 29 with right scores; second: raw 30 with scores computed from 30 (z 1.31, SS 120 …) → only the raw pair differs
		const doc = wordRecall({}, { raw: 30, z: '1.31', standard: 120, scaled: 14, t: 63, percentile: 90 });
		expect(reconcile(doc).discrepancies.map((d) => [d.field, d.pass, d.kind])).toEqual([['raw', 'both', 'mismatch']]);
	});
	it('a shared error is one discrepancy with pass both — what double entry alone would miss', () => {
		const r = reconcile(wordRecall({ standard: 161 }, { standard: '161' }));
		expect(r.discrepancies).toEqual([
			{
				test: 'word-recall',
				field: 'standard',
				pass: 'both',
				kind: 'transposition',
				value: 161,
				other: '161',
				expected: 116,
				alternative: null,
				out_of_range: true
			}
		]);
	});
	it('both passes empty on a field: two missing discrepancies, not one (spec: speeded-match counts 10)', () => {
		const r = reconcile(wordRecall({ t: null }, { t: '' }));
		expect(r.discrepancies.map((d) => d.pass)).toEqual(['first', 'second']);
	});
	it('different wrong values: one discrepancy per pass, first before second', () => {
		const r = reconcile(wordRecall({ standard: 161 }, { standard: 117 }));
		expect(r.discrepancies.map((d) => [d.pass, d.kind, d.value, d.other])).toEqual([
			['first', 'transposition', 161, 117],
			['second', 'rounding', 117, 161]
		]);
	});
	it('a pass with an out-of-range raw score: its derived fields are compared with the other pass only (expected null)', () => {
		const r = reconcile(wordRecall({ raw: 92, standard: 161 }, {}));
		expect(r.discrepancies).toEqual([
			{ test: 'word-recall', field: 'raw', pass: 'first', kind: 'transposition', value: 92, other: 29, expected: null, alternative: null, out_of_range: true },
			{
				test: 'word-recall',
				field: 'standard',
				pass: 'both',
				kind: 'transposition',
				value: 161,
				other: 116,
				expected: null,
				alternative: null,
				out_of_range: true
			}
		]);
	});
	it('a pass with a missing raw score whose other values agree with the other pass: only the raw discrepancy', () => {
		const r = reconcile(wordRecall({ raw: null }, {}));
		expect(r.discrepancies.map((d) => [d.field, d.pass, d.kind])).toEqual([['raw', 'first', 'missing']]);
	});
	it('both raw scores unusable: derived values compared with each other once', () => {
		const r = reconcile(wordRecall({ raw: 60, t: 61 }, { raw: 60, t: 16 }));
		expect(r.discrepancies.map((d) => [d.field, d.pass, d.kind, d.expected])).toEqual([
			['raw', 'both', 'out_of_range', null],
			['t', 'both', 'transposition', null]
		]);
	});
	it('no reference, one side empty: missing, pass both', () => {
		const r = reconcile(wordRecall({ raw: 60 }, { raw: 60, z: null }));
		expect(r.discrepancies[1]).toMatchObject({ field: 'z', pass: 'both', kind: 'missing', value: 1.07, other: null, expected: null });
	});
	it('order: tests in order, then raw, z, standard, scaled, t, percentile, then first before second', () => {
		const doc = specExample();
		doc.tests = [...doc.tests, wordRecall().tests[0]];
		doc.norms = [...doc.norms, ...NORMS.filter((n) => n.test === 'word-recall')];
		doc.passes[0].scores['word-recall'] = { ...WR_REF, percentile: 68, raw: 29 };
		doc.passes[1].scores['word-recall'] = { ...WR_REF, z: '1.7', raw: 92 };
		const r = reconcile(doc);
		expect(r.summary).toEqual({ fields_compared: 24, discrepancies: 14 });
		// the second pass's raw 92 is out of range, so its derived values are compared with the first's only:
		// z 1.7 vs 1.07 (both, in the second's slot) and percentile 86 vs 68 (both, after the first's own check)
		expect(r.discrepancies.slice(10).map((d) => [d.test, d.field, d.pass, d.kind, d.expected])).toEqual([
			['word-recall', 'raw', 'second', 'transposition', null],
			['word-recall', 'z', 'both', 'digit_drop', null],
			['word-recall', 'percentile', 'first', 'transposition', 86],
			['word-recall', 'percentile', 'both', 'transposition', null]
		]);
	});
	it('a test absent from a pass counts as all fields missing', () => {
		const doc = wordRecall();
		doc.passes[1].scores = {};
		const r = reconcile(doc);
		expect(r.summary).toEqual({ fields_compared: 12, discrepancies: 1 + 5 });
		expect(r.discrepancies.every((d) => d.kind === 'missing')).toBe(true);
	});
	it('per-test group choice via protocol.groups', () => {
		const doc = wordRecall({ scaled: 15 }, { scaled: 15 });
		doc.protocol = { group: 'a30', groups: { 'word-recall': 'a40' } };
		const r = reconcile(doc).discrepancies;
		// against a40 (z 1.5): z 1.07 is now wrong_norm_group, scaled 15 is right
		expect(r.find((d) => d.field === 'z')).toMatchObject({ pass: 'both', kind: 'wrong_norm_group', expected: 1.5 });
		expect(r.some((d) => d.field === 'scaled')).toBe(false);
	});
	it('throws a ReconcileInputError when a test has no norms for its group', () => {
		const doc = wordRecall();
		doc.protocol = { group: 'a99' };
		expect(() => reconcile(doc)).toThrow(/no norms for test "word-recall" in group "a99"/);
	});
});
