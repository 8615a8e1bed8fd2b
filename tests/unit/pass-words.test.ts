/**
 * Whom a discrepancy is about, in words (src/lib/status.ts, passWords). reconcile.md uses
 * `pass: "both"` both for two passes that differ (nobody knows yet which is right) and for a value
 * both passes share that the checks reject; a reviewer must be able to tell the two apart.
 */
import { describe, it, expect } from 'vitest';
import { passWords, submittedWords } from '../../src/lib/status';

describe('passWords', () => {
	it('two different raw scores: the passes disagree, one or both may be wrong (never "both passes" as if both erred)', () => {
		const w = passWords({ pass: 'both', first: '24', second: '42' });
		expect(w.label).toBe('the passes disagree: one or both may be wrong');
		expect(w.label).not.toContain('both passes');
		// one pass empty, the other not: still a disagreement
		expect(passWords({ pass: 'both', first: null, second: '7' }).label).toBe('the passes disagree: one or both may be wrong');
	});
	it('the same value in both passes (a shared error): says so', () => {
		expect(passWords({ pass: 'both', first: '11', second: ' 11 ' }).label).toBe('same value in both passes');
		expect(passWords({ pass: 'both', first: null, second: '' }).label).toBe('empty in both passes');
	});
	it('one pass: names it', () => {
		expect(passWords({ pass: 'first', first: '9', second: '9' }).label).toBe('first pass');
		expect(passWords({ pass: 'second', first: null, second: '9' }).label).toBe('second pass');
	});
});

describe('submittedWords (the confirmation after a submit)', () => {
	const base = { status: 'awaiting_second', singlePass: false, fieldsEntered: 27, second: 'Rae Lindqvist', reviewer: 'Rita Castellanos', discrepancies: 0 };
	it('first pass: what was submitted, and that the second pass comes next, blind', () => {
		expect(submittedWords('first', base)).toEqual({
			title: 'First pass submitted and locked (27 fields entered).',
			next: 'Next: Rae Lindqvist enters the second pass blind, without seeing yours. When both passes are in, they are compared field by field and Rita Castellanos reviews any difference.'
		});
	});
	it('first pass not drawn for a second pass: straight to review', () => {
		expect(submittedWords('first', { ...base, status: 'in_review', singlePass: true }).next).toBe(
			'Not drawn for a second pass: your pass was checked against the recomputation, and Rita Castellanos now reviews what it found and signs off.'
		);
	});
	it('second pass: compared, how many discrepancies, review next', () => {
		expect(submittedWords('second', { ...base, status: 'in_review', discrepancies: 2, fieldsEntered: 1 })).toEqual({
			title: 'Second pass submitted and locked (1 field entered).',
			next: 'Both passes are in and were compared: 2 discrepancies were found. Rita Castellanos reviews them against the record form.'
		});
		expect(submittedWords('second', { ...base, status: 'in_review', discrepancies: 0 }).next).toBe(
			'Both passes are in and were compared: they agree with each other and with the recomputation everywhere. Rita Castellanos reviews and signs off.'
		);
	});
});
