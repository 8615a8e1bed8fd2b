/**
 * A decimal comma ("12,5") is never read as a number — a comma is a thousands separator in some
 * places ("1,250" ms could be 1250 or 1.25), so guessing could misread a score — and the message says
 * to type a decimal point instead of the general "Enter a number written in digits".
 */
import { describe, it, expect } from 'vitest';
import { checkField, checkCompositeSum } from '../../src/lib/scoring/reconcile';
import { parseEntered } from '../../src/lib/scoring/scales';
import { compositeSumProblems, parsePercentile } from '../../src/lib/catalog/norm-forms';

const TEST = { raw: { min: 0, max: 60, decimals: 1 }, bounds: null };
const COMMA = 'Use a decimal point, not a comma (12.5, not 12,5).';

describe('a decimal comma', () => {
	it('is not a number (never silently read as 12.5 or 125)', () => {
		expect(parseEntered('12,5', 'raw')).toBeNaN();
		expect(parseEntered('1,250', 'raw')).toBeNaN();
	});

	it('Entry’s live check asks for a decimal point, on raw and derived fields alike', () => {
		expect(checkField(TEST, 'raw', '12,5')).toEqual([{ code: 'not_a_number', message: COMMA }]);
		expect(checkField(TEST, 'z', '-0,8')).toEqual([{ code: 'not_a_number', message: COMMA }]);
		expect(checkField(TEST, 'z', '\u22120,8')).toEqual([{ code: 'not_a_number', message: COMMA }]);
		expect(checkField(TEST, 'percentile', '12,5')).toEqual([{ code: 'not_a_number', message: COMMA }]);
		// the point is fine; other text keeps the general message
		expect(checkField(TEST, 'raw', '12.5')).toEqual([]);
		expect(checkField(TEST, 'raw', 'twelve')).toEqual([{ code: 'not_a_number', message: 'Enter a number written in digits.' }]);
		expect(checkField(TEST, 'raw', '12,5,1')[0].message).toBe('Enter a number written in digits.');
	});

	it('a composite’s sum and a percentile band say it too', () => {
		expect(compositeSumProblems('27,0', ['13', '14'], { min: 2, max: 38, decimals: 0 })).toEqual([COMMA]);
		expect(checkCompositeSum([2, 38], ['13', '14'], '27,0')).toEqual([{ code: 'not_a_number', message: COMMA }]);
		expect(parsePercentile('12,5', true)).toBe('"12,5" has a decimal comma: a percentile is a whole number 1–99');
	});
});
