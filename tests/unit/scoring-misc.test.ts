import { describe, expect, it } from 'vitest';
import {
	addDays,
	charDiff,
	checkField,
	chronologicalAge,
	confidenceInterval,
	explainKind,
	KINDS,
	KIND_NAMES,
	parseIsoDate,
	parseReconcileInput,
	selectNormGroup,
	groupCoverage,
	sem,
	type NormGroupDef
} from '../../src/lib/scoring';
import { SPEEDED_MATCH, specExample, WORD_RECALL } from './scoring-fixtures';

describe('chronological age (years;months;days, borrowing as on a record form)', () => {
	it('borrows 30 days by default: 2016-04-20 → 2024-03-05 is 7;10;15 (hand calculation)', () => {
		expect(chronologicalAge('2016-04-20', '2024-03-05')).toMatchObject({ years: 7, months: 10, days: 15, totalMonths: 94, text: '7;10;15' });
	});
	it('borrows the actual days of the month before the test month when the norm set says so (Feb 2024 has 29)', () => {
		expect(chronologicalAge('2016-04-20', '2024-03-05', { borrowDays: 'actual', rounding: 'truncate' }).text).toBe('7;10;14');
	});
	it('rounds days ≥ 15 up to a month when the rule says so', () => {
		expect(chronologicalAge('2016-04-20', '2024-03-05', { borrowDays: 30, rounding: 'round_days' }).totalMonths).toBe(95);
		expect(chronologicalAge('2016-04-20', '2024-03-05', { borrowDays: 'actual', rounding: 'round_days' }).totalMonths).toBe(94);
		expect(chronologicalAge('2016-04-20', '2024-03-05', { borrowDays: 'actual', rounding: 'round_days', roundUpFromDay: 14 }).totalMonths).toBe(95);
	});
	it('an exact birthday is n;0;0', () => {
		expect(chronologicalAge('2000-05-10', '2030-05-10').text).toBe('30;0;0');
	});
	it('borrows twice when one borrow is not enough (31 January → 1 March 2000 is 30 calendar days)', () => {
		expect(chronologicalAge('2000-01-31', '2000-03-01', { borrowDays: 'actual', rounding: 'truncate' }).text).toBe('0;0;30');
		expect(chronologicalAge('2000-01-31', '2000-03-01').text).toBe('0;1;0');
	});
	it('a leap-day birth', () => {
		expect(chronologicalAge('2012-02-29', '2013-02-28').text).toBe('0;11;29');
		// 1 − 29 < 0: borrow 30 days → 1;0;2 by the hand rule; borrowing February 2013's 28 days → 1;0;0
		expect(chronologicalAge('2012-02-29', '2013-03-01').text).toBe('1;0;2');
		expect(chronologicalAge('2012-02-29', '2013-03-01', { borrowDays: 'actual', rounding: 'truncate' }).text).toBe('1;0;0');
	});
	it('refuses impossible dates and a test before birth', () => {
		expect(() => parseIsoDate('2023-02-29')).toThrow(/no such date/);
		expect(() => parseIsoDate('2023-2-1')).toThrow(/YYYY-MM-DD/);
		expect(() => chronologicalAge('2020-01-02', '2020-01-01')).toThrow(/before birth/);
	});
	it('date arithmetic without time zones', () => {
		expect(addDays('2024-02-28', 1)).toBe('2024-02-29');
		expect(addDays('2024-12-31', 1)).toBe('2025-01-01');
		expect(addDays('2024-03-31', -31)).toBe('2024-02-29');
		expect(addDays('1900-03-01', -1)).toBe('1900-02-28');
	});
});

describe('norm-group selection', () => {
	const groups: NormGroupDef[] = [
		{ id: 'a20', minMonths: 240, maxMonths: 359 },
		{ id: 'a30', minMonths: 360, maxMonths: 479 },
		{ id: 'a30f', minMonths: 360, maxMonths: 479, sex: 'female' },
		{ id: 'a40', minMonths: 480, maxMonths: 599, education: [0, 12] },
		{ id: 'a40h', minMonths: 480, maxMonths: 599, education: [13, 30] }
	];
	const today = '2030-01-01';
	it('selects by age in months, ranges inclusive', () => {
		expect(selectNormGroup('1990-01-01', '2020-01-01', groups, {}, { today }).group?.id).toBe('a30');
		expect(selectNormGroup('1990-01-01', '2019-12-31', groups, {}, { today }).group?.id).toBe('a20');
	});
	it('prefers the more specific group (sex, education)', () => {
		expect(selectNormGroup('1990-01-01', '2025-01-01', groups, { sex: 'female' }, { today }).group?.id).toBe('a30f');
		expect(selectNormGroup('1975-01-01', '2020-06-01', groups, { educationYears: 16 }, { today }).group?.id).toBe('a40h');
		expect(selectNormGroup('1975-01-01', '2020-06-01', groups, { educationYears: 10 }, { today }).group?.id).toBe('a40');
	});
	it('warns within N days of a band boundary', () => {
		const s = selectNormGroup('1990-06-15', '2020-06-12', groups, {}, { today, nearDays: 7 });
		expect(s.age.text).toBe('29;11;27');
		expect(s.group?.id).toBe('a20');
		// The 30th birthday is 2020-06-15, three days after the test date: 2020-06-13 → 29;11;28 and
		// 2020-06-14 → 29;11;29 keep a20; 2020-06-15 → 30;0;0 is a30. So the warning names 3 days
		// (the day that really changes the group), not the 7-day search window, and says what a30 covers.
		expect(s.warnings).toEqual([expect.objectContaining({ code: 'near_boundary', otherGroup: 'a30', days: 3 })]);
		expect(s.warnings[0].message).toContain('3 days later');
		expect(s.warnings[0].message).toContain('ages 30;0–39;11');
		expect(s.warnings[0].message).not.toContain('a30');
		expect(selectNormGroup('1990-06-15', '2020-01-12', groups, {}, { today }).warnings).toEqual([]);
	});
	it('warns once per group change, each direction with its own day count', () => {
		// Birth 1990-06-15; groups a20 (to 29;11) and a30 (30;0–39;11) plus a narrow one-month group for
		// 30;0 only would be odd, so use two boundaries a week apart: a20 ends at 29;11, a30 begins at
		// 30;0. Test 2020-06-15 (30;0;0): one day earlier (2020-06-14, 29;11;30) is a20 → "1 day earlier";
		// later dates stay a30 → exactly one warning.
		const s = selectNormGroup('1990-06-15', '2020-06-15', groups, {}, { today, nearDays: 7 });
		expect(s.group?.id).toBe('a30');
		expect(s.warnings.map((w) => [w.code, (w as { days?: number }).days])).toEqual([['near_boundary', 1]]);
		expect(s.warnings[0].message).toContain('1 day earlier');
		expect(s.warnings[0].message).toContain('ages 20;0–29;11');
	});
	it('names groups by what they cover, never by code', () => {
		expect(groupCoverage({ minMonths: 360, maxMonths: 479, education: [13, 99] })).toBe('ages 30;0–39;11, 13+ years of education');
		expect(groupCoverage({ minMonths: 480, maxMonths: 599, education: [0, 12] })).toBe('ages 40;0–49;11, up to 12 years of education');
		expect(groupCoverage({ minMonths: 240, maxMonths: 359, sex: 'F' })).toBe('ages 20;0–29;11, women');
	});
	it('warns on a test date in the future and when no group fits', () => {
		const s = selectNormGroup('1950-01-01', '2031-01-01', groups, {}, { today });
		expect(s.group).toBeNull();
		expect(s.warnings.map((w) => w.code)).toEqual(['test_date_in_future', 'no_group']);
	});
});

describe('SEM and confidence intervals', () => {
	it('SEM = SD·√(1 − r): SD 15, r .91 → 4.5 (classical test theory, common practice)', () => {
		expect(sem(15, 0.91)).toBeCloseTo(4.5, 12);
		expect(sem(10, 0.75)).toBeCloseTo(5, 12);
	});
	it('95 % interval around standard 100 with r .91: 100 ± 1.96·4.5 → 91–109', () => {
		const ci = confidenceInterval(100, 'standard', 0.91, 0.95);
		expect(ci.critical).toBeCloseTo(1.959964, 5);
		expect(ci.lowerExact).toBeCloseTo(91.18, 2);
		expect([ci.lower, ci.upper]).toEqual([91, 109]);
	});
	it('90 % interval uses 1.645 and clamps to the scale: T 78 with r .8 → 71–80', () => {
		const ci = confidenceInterval(78, 't', 0.8, 0.9);
		expect(ci.critical).toBeCloseTo(1.644854, 5);
		expect([ci.lower, ci.upper]).toEqual([71, 80]);
	});
	it('refuses a reliability outside 0–1', () => {
		expect(() => sem(15, 1.2)).toThrow(RangeError);
	});
});

describe('character diff of two values (diff package)', () => {
	it('shows which digits moved: 116 → 161', () => {
		const segs = charDiff(116, '161');
		expect(segs.map((s) => s.text).join('')).not.toBe('');
		expect(
			segs
				.filter((s) => s.kind !== 'added')
				.map((s) => s.text)
				.join('')
		).toBe('116');
		expect(
			segs
				.filter((s) => s.kind !== 'removed')
				.map((s) => s.text)
				.join('')
		).toBe('161');
	});
	it('a transposition marks both swapped digits, position by position (118 / 181, 73.0 / 37.0)', () => {
		expect(charDiff('118', '181')).toEqual([
			{ text: '1', kind: 'same' },
			{ text: '18', kind: 'removed' },
			{ text: '81', kind: 'added' }
		]);
		expect(charDiff('73.0', '37.0')).toEqual([
			{ text: '73', kind: 'removed' },
			{ text: '37', kind: 'added' },
			{ text: '.0', kind: 'same' }
		]);
	});
	it('a sign added', () => {
		expect(charDiff('1.00', '-1.00')).toEqual([
			{ text: '-', kind: 'added' },
			{ text: '1.00', kind: 'same' }
		]);
	});
	it('a missing value is empty', () => {
		expect(charDiff(null, 74)).toEqual([{ text: '74', kind: 'added' }]);
	});
});

describe('kind explanations', () => {
	it('every kind has a one-line explanation', () => {
		for (const k of KINDS) {
			expect(explainKind(k).length).toBeGreaterThan(10);
			expect(explainKind(k)).not.toContain('\n');
		}
		// the order of the contract's kind table (shared/spec/reconcile.md, "Kinds"), copied by hand
		expect(KINDS).toEqual([
			'missing',
			'follows_other_raw',
			'carried',
			'sum_error',
			'sign_flip',
			'wrong_norm_group',
			'adjacent_row',
			'wrong_scale',
			'raw_as_derived',
			'decimal_shift',
			'transposition',
			'rounding',
			'digit_drop',
			'digit_extra',
			'wrong_digit',
			'out_of_range',
			'mismatch'
		]);
		for (const k of KINDS) expect(KIND_NAMES[k].length).toBeGreaterThan(3);
	});
});

describe('live field checks while typing (blind: no reference)', () => {
	it('raw outside the range and too many decimals', () => {
		expect(checkField(SPEEDED_MATCH, 'raw', '301').map((p) => p.code)).toEqual(['out_of_range']);
		expect(checkField(SPEEDED_MATCH, 'raw', '36.25').map((p) => p.code)).toEqual(['too_many_decimals']);
		expect(checkField(SPEEDED_MATCH, 'raw', '36.20')).toEqual([]);
		expect(checkField(WORD_RECALL, 'raw', 2.5)[0].message).toBe('Raw scores on this test are whole numbers.');
	});
	it('impossible values on their scale', () => {
		expect(checkField(SPEEDED_MATCH, 'scaled', 20).map((p) => p.code)).toEqual(['out_of_range']);
		expect(checkField(SPEEDED_MATCH, 'percentile', 100).map((p) => p.code)).toEqual(['out_of_range']);
		expect(checkField(SPEEDED_MATCH, 'percentile', '>99')).toEqual([]);
		expect(checkField(SPEEDED_MATCH, 'z', '1.075').map((p) => p.code)).toEqual(['too_many_decimals']);
		expect(checkField(SPEEDED_MATCH, 'standard', '115.5').map((p) => p.code)).toEqual(['too_many_decimals']);
		expect(checkField(SPEEDED_MATCH, 't', 'abc').map((p) => p.code)).toEqual(['not_a_number']);
		expect(checkField(SPEEDED_MATCH, 't', '')).toEqual([]);
	});
	it('messages never contain a recomputed value: the check takes no norms or raw score', () => {
		// speeded-match raw 36 → standard 115; a wrong but possible standard score gives no problem at all
		expect(checkField(SPEEDED_MATCH, 'standard', 151)).toEqual([]);
		expect(checkField.length).toBe(3);
	});
});

describe('batch input schema (zod): errors name the path', () => {
	it('accepts the spec example', () => {
		expect(parseReconcileInput(specExample()).ok).toBe(true);
	});
	it('names the path of a bad value', () => {
		const bad = specExample() as unknown as { passes: { scores: Record<string, Record<string, unknown>> }[]; norms: { sd: number }[] };
		bad.passes[1].scores['speeded-match'].raw = true;
		bad.norms[0].sd = 0;
		const r = parseReconcileInput(bad);
		expect(r.ok).toBe(false);
		if (!r.ok) {
			expect(r.errors).toContain('passes[1].scores.speeded-match.raw: expected number or string');
			expect(r.errors).toContain('norms[0].sd: must be above 0');
		}
	});
	it('prefixes the index for array elements, names unknown fields and non-numeric strings', () => {
		const bad = specExample() as unknown as { passes: { scores: Record<string, Record<string, unknown>> }[] };
		bad.passes[0].scores['speeded-match'].standrad = 115;
		bad.passes[0].scores['speeded-match'].z = 'one';
		const r = parseReconcileInput(bad, '[3]');
		expect(r.ok).toBe(false);
		if (!r.ok) {
			expect(r.errors).toContain('[3].passes[0].scores.speeded-match.standrad: unknown field');
			expect(r.errors).toContain('[3].passes[0].scores.speeded-match.z: expected a number written in digits, got "one"');
		}
	});
	it('cross-checks: unknown tests, missing norms for the protocol group, two passes', () => {
		const doc = specExample() as unknown as Record<string, unknown> & { protocol: { group: string }; passes: unknown[] };
		doc.protocol.group = 'a99';
		doc.passes = [doc.passes[0]];
		const r = parseReconcileInput(doc);
		expect(r.ok).toBe(false);
		if (!r.ok) {
			expect(r.errors).toContain('passes: expected exactly two passes');
			expect(r.errors).toContain('protocol.group: no norms for test "speeded-match" in group "a99"');
		}
	});
});
